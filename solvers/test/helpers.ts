/**
 * Test fixtures: seeded operators and sparse vectors, error measures. All randomness comes from
 * MT19937 so every draw is reproducible; operators come from operators/ as the daemon builds them.
 */
import { MT19937, buildOperator, parseOperatorDescription, type LinearOperator } from '../../operators/index.js';
import { uniformIndicesFrom } from '../../operators/derivations.js';
import { norm } from '../../operators/test/helpers.js';

export function operator(description: unknown): LinearOperator {
  return buildOperator(parseOperatorDescription(description));
}

/** Random time samples (m of n) of a signal with a sparse unitary-DFT spectrum. */
export function dftSampling(n: number, m: number, seed: number): LinearOperator {
  return operator({ kind: 'sampling', n, samples: { law: 'uniform', m, seed }, basis: { kind: 'dft' } });
}

/** Real m×n Gaussian matrix, entries N(0, 1/m). */
export function gaussianMatrix(rows: number, cols: number, seed: number): LinearOperator {
  return operator({ kind: 'gaussian', rows, cols, seed });
}

/** Standard normal draw by Box–Muller (Box & Muller, Ann. Math. Statist. 29(2), 1958). */
export function gaussian(rng: MT19937): number {
  const u1 = rng.nextDouble();
  const u2 = rng.nextDouble();
  return Math.sqrt(-2 * Math.log(1 - u1)) * Math.cos(2 * Math.PI * u2);
}

/**
 * A k-sparse vector of length n with standard normal amplitudes, complex (both parts) or real;
 * its support is drawn like a uniform sample set (partial Fisher–Yates on the same generator).
 */
export function sparseVector(n: number, k: number, rng: MT19937, complex: boolean): Float64Array {
  const x = new Float64Array(2 * n);
  for (const j of uniformIndicesFrom(rng, n, k)) {
    x[2 * j] = gaussian(rng);
    if (complex) x[2 * j + 1] = gaussian(rng);
  }
  return x;
}

export { norm };

/** ‖a − b‖ / ‖b‖. */
export function relativeError(a: Float64Array, b: Float64Array): number {
  let d = 0;
  for (let i = 0; i < a.length; i++) d += (a[i]! - b[i]!) ** 2;
  return Math.sqrt(d) / norm(b);
}

/** y = A x (fresh array). */
export function measure(A: LinearOperator, x: Float64Array): Float64Array {
  const y = new Float64Array(2 * A.rows);
  A.apply(x, y);
  return y;
}

/** Adds complex white Gaussian noise with E|e_i|² = σ² (σ²/2 per part) to y, in place. */
export function addNoise(y: Float64Array, sigma: number, rng: MT19937): void {
  const sd = sigma / Math.SQRT2;
  for (let i = 0; i < y.length; i++) y[i] = y[i]! + sd * gaussian(rng);
}

/** Share of draws for which `trial(draw)` is true. */
export function successRate(draws: number, trial: (draw: number) => boolean): number {
  let ok = 0;
  for (let d = 0; d < draws; d++) if (trial(d)) ok++;
  return ok / draws;
}
