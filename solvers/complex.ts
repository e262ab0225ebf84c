/**
 * Small kernels over interleaved complex vectors ([re0, im0, re1, im1, ...]).
 * Every function takes its output preallocated and allocates nothing.
 * Inner products follow ⟨a, b⟩ = Σ conj(a_j) b_j; only their real part is ever needed here.
 */

/** ‖v‖₂² over the first `count` complex entries (all of v by default). */
export function normSquared(v: Float64Array, count = v.length >> 1): number {
  let s = 0;
  const end = 2 * count;
  for (let i = 0; i < end; i++) s += v[i]! * v[i]!;
  return s;
}

/** ‖v‖₁ = Σ |v_j| (complex modulus). */
export function l1Norm(v: Float64Array): number {
  let s = 0;
  for (let i = 0; i < v.length; i += 2) {
    const re = v[i]!;
    const im = v[i + 1]!;
    if (re !== 0 || im !== 0) s += Math.sqrt(re * re + im * im);
  }
  return s;
}

/** Σ w_j |v_j|, or ‖v‖₁ when w is null. */
export function weightedL1Norm(v: Float64Array, w: Float64Array | null): number {
  if (w === null) return l1Norm(v);
  let s = 0;
  for (let j = 0, i = 0; i < v.length; j++, i += 2) {
    const re = v[i]!;
    const im = v[i + 1]!;
    if (re !== 0 || im !== 0) s += w[j]! * Math.sqrt(re * re + im * im);
  }
  return s;
}

/** Re⟨a, b⟩. */
export function realDot(a: Float64Array, b: Float64Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i]! * b[i]!;
  return s;
}

/** max_j |v_j|. */
export function maxModulus(v: Float64Array): number {
  let m = 0;
  for (let i = 0; i < v.length; i += 2) {
    const q = v[i]! * v[i]! + v[i + 1]! * v[i + 1]!;
    if (q > m) m = q;
  }
  return Math.sqrt(m);
}

/** max_j |v_j| / w_j (max_j |v_j| when w is null): the dual norm of the weighted l1 norm. */
export function weightedMaxModulus(v: Float64Array, w: Float64Array | null): number {
  if (w === null) return maxModulus(v);
  let m = 0;
  for (let j = 0, i = 0; i < v.length; j++, i += 2) {
    const q = (v[i]! * v[i]! + v[i + 1]! * v[i + 1]!) / (w[j]! * w[j]!);
    if (q > m) m = q;
  }
  return Math.sqrt(m);
}

/** out ← a − b (out may alias a or b). */
export function subtract(a: Float64Array, b: Float64Array, out: Float64Array): void {
  for (let i = 0; i < out.length; i++) out[i] = a[i]! - b[i]!;
}

/** y ← y + alpha·x for real alpha. */
export function addScaled(y: Float64Array, alpha: number, x: Float64Array): void {
  for (let i = 0; i < y.length; i++) y[i] = y[i]! + alpha * x[i]!;
}

/** v ← alpha·v for real alpha. */
export function scale(v: Float64Array, alpha: number): void {
  for (let i = 0; i < v.length; i++) v[i] = v[i]! * alpha;
}

/** True when every entry is finite. */
export function allFinite(v: Float64Array): boolean {
  for (let i = 0; i < v.length; i++) if (!Number.isFinite(v[i]!)) return false;
  return true;
}

/**
 * Complex soft thresholding of one entry: shrinks the modulus of (re, im) by t, keeping the
 * phase; returns the factor max(0, 1 − t/|z|) to multiply both parts with. This is the
 * proximal map of t·|z| on ℂ (the real case is the usual sign(z)·max(|z| − t, 0)).
 */
export function shrinkFactor(re: number, im: number, t: number): number {
  const mod = Math.sqrt(re * re + im * im);
  return mod > t ? 1 - t / mod : 0;
}
