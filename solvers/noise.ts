import type { LinearOperator } from '../operators/types.js';
import { MT19937 } from '../operators/index.js';
import type { Workspace } from './workspace.js';

/**
 * Noise conventions and the rules that turn a noise level into λ (LASSO) or ε (noise-aware
 * basis pursuit).
 *
 * σ ("noiseSigma") is the root-mean-square noise per measurement: E|e_i|² = σ². For complex
 * data that is the total over both parts (each of re and im has variance σ²/2); for a real
 * operator with real data the noise is real with variance σ². Either way E‖e‖₂² = m σ².
 */

/** Fixed seed of the probe vectors in estimateRmsColumnNorm: the estimate is reproducible. */
const PROBE_SEED = 20081;
const PROBES = 8;

/**
 * Root-mean-square column norm c̄ = ‖A‖_F / √n, estimated once per operator with Hutchinson's
 * trace estimator (Hutchinson, Commun. Stat. Simul. 19(2), 1990): for z with independent unit-
 * modulus entries of uniform phase (Steinhaus), E‖A z‖² = Σ_j ‖a_j‖² = ‖A‖_F². Eight probes from
 * MT19937 seeded with a fixed seed; exact when all columns have the same norm and A's columns
 * are orthogonal, within a few per cent on the random operators used here.
 */
export function rmsColumnNorm(A: LinearOperator, ws: Workspace): number {
  if (ws.rmsColumnNorm !== undefined) return ws.rmsColumnNorm;
  const rng = new MT19937(PROBE_SEED);
  const z = ws.colVector('noise.probe');
  const az = ws.rowVector('noise.probeImage');
  let total = 0;
  for (let p = 0; p < PROBES; p++) {
    for (let i = 0; i < z.length; i += 2) {
      const phase = 2 * Math.PI * rng.nextDouble();
      z[i] = Math.cos(phase);
      z[i + 1] = Math.sin(phase);
    }
    A.apply(z, az);
    for (let i = 0; i < az.length; i++) total += az[i]! * az[i]!;
  }
  ws.rmsColumnNorm = Math.sqrt(total / PROBES / A.cols);
  return ws.rmsColumnNorm;
}

/**
 * λ from a noise level: λ = factor · σ · c̄ · √(2 ln n). With real Gaussian noise, (Aᴴe)_j is
 * N(0, σ²‖a_j‖²) and its maximum over n columns stays below σ‖a_j‖√(2 ln n) with high probability
 * (the universal threshold of Donoho & Johnstone, Biometrika 81(3), 1994, used for basis-pursuit
 * denoising by Chen, Donoho & Saunders, SIAM J. Sci. Comput. 20(1), 1998). For circular complex
 * noise the maximum is near σ‖a_j‖√(ln n), so the same rule is on the safe (sparser) side.
 */
export function lambdaFromNoise(sigma: number, n: number, columnNorm: number, factor: number): number {
  return factor * sigma * columnNorm * Math.sqrt(2 * Math.log(Math.max(n, 2)));
}

/**
 * ε from a noise level: ε = factor · σ · √(m + 2√(2m)). For real noise ‖e‖²/σ² is χ² with m degrees
 * of freedom (mean m, standard deviation √(2m)); the bound is two standard deviations above the
 * mean (the choice of Candès, Romberg & Tao, Comm. Pure Appl. Math. 59(8), 2006). For complex
 * noise the standard deviation is √m, so the bound holds with more room.
 */
export function epsilonFromNoise(sigma: number, m: number, factor: number): number {
  return factor * sigma * Math.sqrt(m + 2 * Math.sqrt(2 * m));
}

/**
 * σ estimated from the residual of a least-squares fit on a support of size s:
 * σ̂ = ‖y − A x‖ / √(m − s), the usual unbiased estimate when s columns were fitted.
 * Returns undefined when there are no degrees of freedom left (s ≥ m).
 */
export function sigmaFromResidual(residualNorm: number, m: number, supportSize: number): number | undefined {
  const dof = m - supportSize;
  return dof >= 1 ? residualNorm / Math.sqrt(dof) : undefined;
}
