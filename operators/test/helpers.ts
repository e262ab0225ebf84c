/** Test helpers: random vectors, inner products, dense materialisation, power iteration. */
import { MT19937 } from '../mt19937.js';
import type { LinearOperator } from '../types.js';

/** Complex vector of n entries with re, im uniform in [−1, 1). */
export function randomComplex(n: number, rng: MT19937): Float64Array {
  const v = new Float64Array(2 * n);
  for (let i = 0; i < 2 * n; i++) v[i] = 2 * rng.nextDouble() - 1;
  return v;
}

/** <a, b> = Σ conj(a_i) b_i as [re, im]. */
export function innerProduct(a: Float64Array, b: Float64Array): [number, number] {
  let re = 0;
  let im = 0;
  for (let i = 0; i < a.length; i += 2) {
    re += a[i]! * b[i]! + a[i + 1]! * b[i + 1]!;
    im += a[i]! * b[i + 1]! - a[i + 1]! * b[i]!;
  }
  return [re, im];
}

export function norm(a: Float64Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i]! * a[i]!;
  return Math.sqrt(s);
}

export function maxAbsDiff(a: Float64Array | number[], b: Float64Array | number[]): number {
  let d = 0;
  for (let i = 0; i < a.length; i++) d = Math.max(d, Math.abs(a[i]! - b[i]!));
  return d;
}

/** Relative mismatch |<A x, y> − <x, Aᴴ y>| / (‖x‖·‖y‖·normBound) on random x, y. */
export function adjointMismatch(op: LinearOperator, rng: MT19937): number {
  const x = randomComplex(op.cols, rng);
  const y = randomComplex(op.rows, rng);
  const ax = new Float64Array(2 * op.rows);
  const ahy = new Float64Array(2 * op.cols);
  op.apply(x, ax);
  op.adjoint(y, ahy);
  const [lr, li] = innerProduct(y, ax); // <A x, y> = conj(<y, A x>); compare <y, A x> with <Aᴴ y, x>
  const [rr, ri] = innerProduct(ahy, x);
  return Math.hypot(lr - rr, li - ri) / (norm(x) * norm(y) * op.normBound);
}

/** Column j of A (A e_j), interleaved complex of length 2·rows. */
export function column(op: LinearOperator, j: number): Float64Array {
  const e = new Float64Array(2 * op.cols);
  e[2 * j] = 1;
  const out = new Float64Array(2 * op.rows);
  op.apply(e, out);
  return out;
}

/** A as a dense rows × cols complex matrix: columns[j] = A e_j. */
export function denseColumns(op: LinearOperator): Float64Array[] {
  return Array.from({ length: op.cols }, (_, j) => column(op, j));
}

/** Dense product Σ_j c_j · columns[j]. */
export function denseApply(columns: Float64Array[], c: Float64Array, rows: number): Float64Array {
  const out = new Float64Array(2 * rows);
  columns.forEach((col, j) => {
    const cr = c[2 * j]!;
    const ci = c[2 * j + 1]!;
    for (let t = 0; t < rows; t++) {
      out[2 * t] += col[2 * t]! * cr - col[2 * t + 1]! * ci;
      out[2 * t + 1] += col[2 * t]! * ci + col[2 * t + 1]! * cr;
    }
  });
  return out;
}

/** Power iteration on Aᴴ A from a random start: an estimate of ‖A‖₂ from below. */
export function powerIterationNorm(op: LinearOperator, iterations: number, rng: MT19937): number {
  let x = randomComplex(op.cols, rng);
  const ax = new Float64Array(2 * op.rows);
  const ahax = new Float64Array(2 * op.cols);
  let estimate = 0;
  for (let it = 0; it < iterations; it++) {
    const nx = norm(x);
    for (let i = 0; i < x.length; i++) x[i]! /= nx;
    op.apply(x, ax);
    estimate = Math.max(estimate, norm(ax));
    op.adjoint(ax, ahax);
    x = ahax.slice();
  }
  return estimate;
}

/** Direct O(n²) DFT sum: out[k] = scale · Σ_t x[t] e^{sign·2πi kt/n}. */
export function directDft(x: Float64Array, sign: 1 | -1, scale: number): Float64Array {
  const n = x.length / 2;
  const out = new Float64Array(2 * n);
  for (let k = 0; k < n; k++) {
    let re = 0;
    let im = 0;
    for (let t = 0; t < n; t++) {
      const angle = (sign * 2 * Math.PI * ((k * t) % n)) / n;
      const c = Math.cos(angle);
      const s = Math.sin(angle);
      re += x[2 * t]! * c - x[2 * t + 1]! * s;
      im += x[2 * t]! * s + x[2 * t + 1]! * c;
    }
    out[2 * k] = re * scale;
    out[2 * k + 1] = im * scale;
  }
  return out;
}
