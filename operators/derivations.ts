/**
 * Seeded derivations: how sample sets, windows and dense matrices are drawn from MT19937.
 * Each function starts its own generator from `seed` (init_genrand) and consumes it in the
 * exact order specified in docs/operators.md, so a front end in another language can
 * rebuild the same operator. "u" below is one genrand_res53 draw in [0, 1).
 */
import { MT19937 } from './mt19937.js';

/**
 * m distinct indices of 0..n−1, uniformly: partial Fisher–Yates over p = [0, 1, …, n−1],
 * for i = 0..m−1 swap p[i] with p[i + floor(u·(n − i))]; the result is p[0..m) sorted.
 */
export function drawUniformIndices(n: number, m: number, seed: number): Int32Array {
  return uniformIndicesFrom(new MT19937(seed), n, m);
}

/** The draw of drawUniformIndices from a generator already in use (it consumes m draws of rng). */
export function uniformIndicesFrom(rng: MT19937, n: number, m: number): Int32Array {
  const p = new Int32Array(n);
  for (let i = 0; i < n; i++) p[i] = i;
  for (let i = 0; i < m; i++) {
    const j = i + Math.floor(rng.nextDouble() * (n - i));
    const t = p[i]!;
    p[i] = p[j]!;
    p[j] = t;
  }
  return p.slice(0, m).sort();
}

/** |k̃| for index k of a length-n DFT, k̃ the signed frequency (k, or k − n above n/2). */
export function absSignedFrequency(k: number, n: number): number {
  return Math.min(k, n - k);
}

/**
 * m distinct indices of 0..n−1 favouring low frequencies: weight w_k = (1 + |k̃|)^(−decay),
 * drawn without replacement by exponential keys (Efraimidis & Spirakis, "Weighted random
 * sampling with a reservoir", Inf. Process. Lett. 97(5), 2006): for k = 0..n−1 in order,
 * key_k = −ln(1 − u_k) · (1 + |k̃|)^decay; keep the m smallest keys (ties: smaller k),
 * sorted. This is the law of m successive draws, each ∝ w among the indices not yet drawn.
 */
export function drawVariableDensityIndices(n: number, m: number, seed: number, decay: number): Int32Array {
  const rng = new MT19937(seed);
  const keys = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    keys[k] = -Math.log(1 - rng.nextDouble()) * Math.pow(1 + absSignedFrequency(k, n), decay);
  }
  const order = new Int32Array(n);
  for (let k = 0; k < n; k++) order[k] = k;
  order.sort((a, b) => keys[a]! - keys[b]! || a - b);
  return order.slice(0, m).sort();
}

/** Steinhaus sequence: entry t = e^{2πi u_t} (interleaved complex, length 2n). */
export function drawSteinhaus(n: number, seed: number): Float64Array {
  const rng = new MT19937(seed);
  const out = new Float64Array(2 * n);
  for (let t = 0; t < n; t++) {
    const phase = 2 * Math.PI * rng.nextDouble();
    out[2 * t] = Math.cos(phase);
    out[2 * t + 1] = Math.sin(phase);
  }
  return out;
}

/** Rademacher sign of one draw: +1 when u < 0.5, else −1. */
function sign(rng: MT19937): number {
  return rng.nextDouble() < 0.5 ? 1 : -1;
}

/** Rademacher sequence: entry t = ±1 (interleaved complex with zero imaginary parts). */
export function drawRademacher(n: number, seed: number): Float64Array {
  const rng = new MT19937(seed);
  const out = new Float64Array(2 * n);
  for (let t = 0; t < n; t++) out[2 * t] = sign(rng);
  return out;
}

/**
 * Box–Muller (Box & Muller, Ann. Math. Statist. 29(2), 1958) on two draws u1, u2 (in that
 * order): ρ = √(−2 ln(1 − u1)), writes ρ·cos(2π u2) to out[i] and ρ·sin(2π u2) to out[i+1].
 * (1 − u1 lies in (0, 1], so the logarithm is finite.)
 */
function gaussianPair(rng: MT19937, out: Float64Array, i: number): void {
  const rho = Math.sqrt(-2 * Math.log(1 - rng.nextDouble()));
  const phase = 2 * Math.PI * rng.nextDouble();
  out[i] = rho * Math.cos(phase);
  out[i + 1] = rho * Math.sin(phase);
}

/** Complex Gaussian sequence: entry t = one Box–Muller pair (cos part real, sin part imaginary). */
export function drawGaussianWindow(n: number, seed: number): Float64Array {
  const rng = new MT19937(seed);
  const out = new Float64Array(2 * n);
  for (let t = 0; t < n; t++) gaussianPair(rng, out, 2 * t);
  return out;
}

/**
 * `count` real N(0, scale²) entries: Box–Muller pairs fill entries 2p and 2p+1; for an odd
 * count the last pair's sine value is drawn and discarded.
 */
export function drawGaussianEntries(count: number, seed: number, scale: number): Float64Array {
  const rng = new MT19937(seed);
  const pairs = new Float64Array(count + (count % 2));
  for (let i = 0; i < count; i += 2) gaussianPair(rng, pairs, i);
  const out = new Float64Array(count);
  for (let i = 0; i < count; i++) out[i] = pairs[i]! * scale;
  return out;
}

/** `count` real entries ±scale, one Rademacher draw each. */
export function drawBernoulliEntries(count: number, seed: number, scale: number): Float64Array {
  const rng = new MT19937(seed);
  const out = new Float64Array(count);
  for (let i = 0; i < count; i++) out[i] = scale * sign(rng);
  return out;
}

/** g / ‖g‖₂ with ‖g‖₂² summed over t = 0..n−1 in order (interleaved complex); g must be nonzero. */
export function normalizeWindow(g: Float64Array): Float64Array {
  let energy = 0;
  for (let i = 0; i < g.length; i++) energy += g[i]! * g[i]!;
  const inv = 1 / Math.sqrt(energy);
  const out = new Float64Array(g.length);
  for (let i = 0; i < g.length; i++) out[i] = g[i]! * inv;
  return out;
}
