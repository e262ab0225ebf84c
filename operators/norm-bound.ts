/**
 * A guaranteed upper bound on the spectral norm of a dense matrix (row-major, `im` null
 * when real). Solvers take their step size from it, so it must never be below ‖A‖₂, and a
 * loose bound slows them down; so:
 *
 * 1. Two cheap bounds always hold: ‖A‖_F and √(‖A‖₁‖A‖∞) (Schur's test; Golub & Van Loan,
 *    Matrix Computations, §2.3.2). Computed sums carry at most ~K·u relative rounding error
 *    for K ≤ 2^22 terms, so both are inflated by 1 + 1e−9.
 * 2. When affordable, a certificate: with G the Gram matrix of the shorter side (A Aᴴ or
 *    Aᴴ A, both with eigenvalues ‖A‖₂² ≥ …), μ is an upper bound on λ_max(G) exactly when
 *    μI − G is positive definite, which a Cholesky factorisation decides. μ is tried at
 *    λ̂·(1.001, 1.01, 1.05, …) with λ̂ a power-iteration estimate, and the first μ whose test
 *    succeeds gives ‖A‖₂ ≤ √μ. Rounding is covered by testing (μ − δ)I − Ĝ instead, with δ
 *    above both the error of the computed Gram matrix Ĝ (‖Ĝ − G‖₂ ≤ γ_K‖A‖_F²; Higham,
 *    Accuracy and Stability of Numerical Algorithms, §3.1 and Lemma 3.5 for complex
 *    products) and the backward error of a Cholesky that runs to completion (Demmel,
 *    "On floating point errors in Cholesky", LAPACK Working Note 14, 1989; Rump,
 *    "Verification of positive definiteness", BIT 46, 2006): δ = 8(p + K + 2)·u·(‖A‖_F² + p·μ)
 *    for a p × p test, generous against both and still ~1e−9 relative at the largest sizes.
 *    A complex G is tested through its real form [[Gr, −Gi], [Gi, Gr]] (same eigenvalues).
 *
 * The certificate costs about s²·K multiply-adds for the Gram matrix (s the shorter and K the
 * longer side) plus p³/6 per Cholesky; above CERTIFY_BUDGET the cheap bound is used alone.
 */
import { MT19937 } from './mt19937.js';

/** Multiply-adds allowed for the Gram matrix (≈ a second or two on one core). */
const CERTIFY_BUDGET = 2 ** 29;
const UNIT_ROUNDOFF = 2 ** -53;
const CHEAP_BOUND_SLACK = 1 + 1e-9;
const TRIAL_FACTORS = [1.001, 1.01, 1.05, 1.2, 1.5, 2, 4, 16];

export function spectralNormBound(rows: number, cols: number, re: Float64Array, im: Float64Array | null): number {
  const cheap = cheapNormBound(rows, cols, re, im);
  const s = Math.min(rows, cols);
  const k = Math.max(rows, cols);
  if (cheap === 0 || s * s * k * (im === null ? 1 : 4) > CERTIFY_BUDGET) return cheap;
  return Math.min(cheap, certifiedNormBound(rows, cols, re, im, cheap));
}

/** min(‖A‖_F, √(‖A‖₁‖A‖∞)), slightly inflated to cover rounding in the sums. */
function cheapNormBound(rows: number, cols: number, re: Float64Array, im: Float64Array | null): number {
  let frobenius2 = 0;
  let maxRowSum = 0;
  const colSums = new Float64Array(cols);
  for (let i = 0; i < rows; i++) {
    let rowSum = 0;
    for (let j = 0; j < cols; j++) {
      const a = im === null ? Math.abs(re[i * cols + j]!) : Math.hypot(re[i * cols + j]!, im[i * cols + j]!);
      frobenius2 += a * a;
      rowSum += a;
      colSums[j] += a;
    }
    maxRowSum = Math.max(maxRowSum, rowSum);
  }
  let maxColSum = 0;
  for (let j = 0; j < cols; j++) maxColSum = Math.max(maxColSum, colSums[j]!);
  return Math.min(Math.sqrt(frobenius2), Math.sqrt(maxRowSum * maxColSum)) * CHEAP_BOUND_SLACK;
}

function certifiedNormBound(
  rows: number,
  cols: number,
  re: Float64Array,
  im: Float64Array | null,
  fallback: number,
): number {
  const byRows = rows <= cols;
  const s = byRows ? rows : cols;
  const k = byRows ? cols : rows;
  // Gram of the s vectors of length k: rows of A (stride cols, step 1) or its columns.
  const gram = realFormGram(re, im, s, k, byRows ? cols : 1, byRows ? 1 : cols);
  const p = im === null ? s : 2 * s;
  let frobenius2 = 0;
  for (let i = 0; i < p; i++) frobenius2 += gram[i * p + i]!;
  if (im !== null) frobenius2 /= 2;
  const estimate = largestEigenvalueEstimate(gram, p);
  const work = new Float64Array(p * p);
  for (const factor of TRIAL_FACTORS) {
    const mu = estimate * factor;
    if (Math.sqrt(mu) >= fallback) break;
    const delta = 8 * (p + k + 2) * UNIT_ROUNDOFF * (frobenius2 + p * mu);
    if (isPositiveDefiniteShift(gram, p, mu - delta, work)) return Math.sqrt(mu);
  }
  return fallback;
}

/**
 * Real symmetric p × p Gram matrix (row-major, full) of the s vectors v_i[t] = A[i·stride + t·step],
 * t < k: G_ij = Σ_t v_i[t]·conj(v_j[t]); for complex data, its real form [[Gr, −Gi], [Gi, Gr]].
 */
function realFormGram(
  re: Float64Array,
  im: Float64Array | null,
  s: number,
  k: number,
  stride: number,
  step: number,
): Float64Array {
  const p = im === null ? s : 2 * s;
  const g = new Float64Array(p * p);
  for (let i = 0; i < s; i++) {
    for (let j = 0; j <= i; j++) {
      let gr = 0;
      let gi = 0;
      for (let t = 0; t < k; t++) {
        const a = i * stride + t * step;
        const b = j * stride + t * step;
        if (im === null) {
          gr += re[a]! * re[b]!;
        } else {
          // v_i · conj(v_j)
          gr += re[a]! * re[b]! + im[a]! * im[b]!;
          gi += im[a]! * re[b]! - re[a]! * im[b]!;
        }
      }
      if (im === null) {
        g[i * p + j] = gr;
        g[j * p + i] = gr;
      } else {
        // Real form: Gr on both diagonal blocks, Gi below, −Gi above (Gi is antisymmetric).
        g[i * p + j] = g[j * p + i] = gr;
        g[(s + i) * p + s + j] = g[(s + j) * p + s + i] = gr;
        g[(s + i) * p + j] = g[j * p + s + i] = gi;
        g[(s + j) * p + i] = g[i * p + s + j] = -gi;
      }
    }
  }
  return g;
}

/** Power iteration on a symmetric PSD matrix from a fixed start; returns the largest Rayleigh quotient seen. */
function largestEigenvalueEstimate(g: Float64Array, p: number): number {
  const rng = new MT19937(1);
  let v = new Float64Array(p);
  let w = new Float64Array(p);
  for (let i = 0; i < p; i++) v[i] = rng.nextDouble() - 0.5;
  let best = 0;
  for (let iter = 0; iter < 100; iter++) {
    let norm2 = 0;
    for (let i = 0; i < p; i++) norm2 += v[i]! * v[i]!;
    if (norm2 === 0) break;
    let quotient = 0;
    for (let i = 0; i < p; i++) {
      let sum = 0;
      for (let j = 0; j < p; j++) sum += g[i * p + j]! * v[j]!;
      w[i] = sum;
      quotient += v[i]! * sum;
    }
    quotient /= norm2;
    if (quotient <= best * (1 + 1e-9) && iter > 10) break;
    best = Math.max(best, quotient);
    const inv = 1 / Math.sqrt(norm2);
    [v, w] = [w, v];
    for (let i = 0; i < p; i++) v[i]! *= inv;
  }
  return best;
}

/** Does the Cholesky factorisation of shift·I − G run to completion with positive pivots? */
function isPositiveDefiniteShift(g: Float64Array, p: number, shift: number, work: Float64Array): boolean {
  for (let i = 0; i < p * p; i++) work[i] = -g[i]!;
  for (let i = 0; i < p; i++) work[i * p + i] += shift;
  // In-place lower-triangular Cholesky (row-oriented).
  for (let j = 0; j < p; j++) {
    let d = work[j * p + j]!;
    for (let t = 0; t < j; t++) d -= work[j * p + t]! * work[j * p + t]!;
    if (!(d > 0)) return false;
    const ljj = Math.sqrt(d);
    work[j * p + j] = ljj;
    for (let i = j + 1; i < p; i++) {
      let sum = work[i * p + j]!;
      for (let t = 0; t < j; t++) sum -= work[i * p + t]! * work[j * p + t]!;
      work[i * p + j] = sum / ljj;
    }
  }
  return true;
}
