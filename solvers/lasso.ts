import type { LinearOperator } from '../operators/types.js';
import { maxModulus } from './complex.js';
import { fista } from './fista.js';
import { lambdaFromNoise, rmsColumnNorm, sigmaFromResidual } from './noise.js';
import type { MethodOutcome } from './outcome.js';
import { REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, refitOnSupport } from './refit.js';
import type { LassoSettings } from './settings.js';
import { detectSupport } from './support.js';
import type { WarmState } from './types.js';
import type { Workspace } from './workspace.js';

/**
 * LASSO, min ½‖A x − y‖² + λ‖x‖₁, by FISTA (fista.ts) with continuation in λ and a choice of λ:
 *   1. `lambda` in the settings, as given;
 *   2. else from a noise level σ (the frame's, else the settings'): λ = factor·σ·c̄·√(2 ln n);
 *   3. else from an estimate of σ: solve, fit least squares on the support found, take
 *      σ̂ = ‖y − A x_fit‖/√(m − |S|), set λ from σ̂ by rule 2 and solve again (warm) until λ moves
 *      by less than 5 % (at most four rounds). A stream carries λ over in its warm state, so
 *      after the first frame one round is the rule.
 * Rules 2 and 3 never go below lambdaFloor·‖Aᴴy‖∞.
 *
 * Continuation (as in Hale, Yin & Zhang, SIAM J. Optim. 19(3), 2008): a cold start solves
 * λ_k = max(λ, η^k ‖Aᴴy‖∞), k = 1, 2, ..., each loosely, warm-starting the next; a warm start
 * begins at the previous frame's λ (or directly at the target), which skips most of the path.
 */

/** Relative duality gap at which an intermediate continuation level is left for the next. */
const STAGE_TOLERANCE = 1e-3;
/** First λ of the noise-estimation rounds on a cold start, as a fraction of ‖Aᴴy‖∞. */
const ESTIMATION_START = 0.05;
const ESTIMATION_ROUNDS = 4;
const ESTIMATION_SETTLED = 0.05;

export function lassoMethod(
  A: LinearOperator,
  y: Float64Array,
  s: LassoSettings,
  warm: WarmState | undefined,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  const aty = ws.colVector('lasso.aty');
  A.adjoint(y, aty);
  const lambdaMax = maxModulus(aty);
  const floor = s.lambdaFloor * lambdaMax;
  const noise = sigma ?? s.noiseSigma;
  const step = 1 / (A.normBound * A.normBound);
  const columnNorm = s.lambda === undefined ? rmsColumnNorm(A, ws) : 1;
  const fromNoise = (level: number): number =>
    Math.max(floor, lambdaFromNoise(level, A.cols, columnNorm, s.lambdaFactor));

  const estimating = s.lambda === undefined && noise === undefined;
  const warmLambda = warm?.lambda !== undefined && warm.lambda > 0 && Number.isFinite(warm.lambda) ? warm.lambda : undefined;
  let target: number;
  if (s.lambda !== undefined) target = s.lambda;
  else if (noise !== undefined) target = fromNoise(noise);
  else target = Math.max(floor, warmLambda ?? ESTIMATION_START * lambdaMax);

  const evidence: Record<string, number> = { lambda_max: lambdaMax };
  if (noise !== undefined) evidence['noise_sigma'] = noise;
  if (target >= lambdaMax) {
    // ‖Aᴴy‖∞ ≤ λ makes x = 0 optimal (its subgradient condition holds): an exact answer.
    x.fill(0);
    evidence['lambda'] = target;
    return {
      iterations: 0,
      certificate: { kind: 'duality_gap', value: 0 },
      converged: true,
      fitted: false,
      evidence,
      warm: { lambda: target, step },
    };
  }

  const hasWarmX = warm?.x !== undefined;
  let level = target;
  if (s.continuation) {
    const start = hasWarmX ? Math.min(lambdaMax, warmLambda ?? target) : s.continuationFactor * lambdaMax;
    level = Math.max(start, target);
  }
  let used = 0;
  let finishIterations = 0;
  let relGap = Infinity;
  let gram = warm?.gram;
  let reachedTarget = false;
  /** One FISTA solve at λ from the current x, its spend and its state added to the totals. */
  const solveAt = (lambda: number, tolerance: number): void => {
    const out = fista(
      A,
      y,
      x,
      {
        lambda,
        weights: null,
        maxIterations: s.maxIterations - used,
        tolerance,
        stepTolerance: s.stepTolerance,
        restart: s.restart,
        finish: true,
        gram,
      },
      ws,
    );
    used += out.iterations;
    finishIterations += out.finishIterations;
    relGap = out.relGap;
    gram = out.gram;
  };
  for (;;) {
    const final = level <= target;
    solveAt(final ? target : level, final ? s.tolerance : Math.max(s.tolerance, STAGE_TOLERANCE));
    if (final) {
      reachedTarget = true;
      break;
    }
    if (used >= s.maxIterations) break;
    level = Math.max(target, level * s.continuationFactor);
  }

  if (estimating && reachedTarget) {
    let rounds = 0;
    while (rounds < ESTIMATION_ROUNDS && used < s.maxIterations) {
      const estimate = estimateSigma(A, y, x, s.supportThreshold, ws);
      if (estimate === undefined) break;
      evidence['noise_sigma_estimate'] = estimate;
      const next = Math.min(lambdaMax, fromNoise(estimate));
      if (Math.abs(next - target) <= ESTIMATION_SETTLED * target) break;
      target = next;
      solveAt(target, s.tolerance);
      rounds++;
    }
  }
  evidence['lambda'] = target;
  evidence['duality_gap'] = relGap;
  evidence['finish_iterations'] = finishIterations;
  return {
    iterations: used,
    certificate: { kind: 'duality_gap', value: relGap },
    converged: reachedTarget && relGap <= s.tolerance,
    fitted: false,
    evidence,
    warm: gram === undefined ? { lambda: target, step } : { lambda: target, step, gram },
  };
}

/** σ̂ from a least-squares fit on the support of x (x itself is left untouched). */
function estimateSigma(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  supportThreshold: number,
  ws: Workspace,
): number | undefined {
  const support = ws.colIndices('lasso.support');
  const count = detectSupport(x, supportThreshold, support);
  if (count >= A.rows) return undefined;
  const fit = ws.colVector('lasso.fit');
  fit.set(x);
  if (count > 0) refitOnSupport(A, y, support, count, fit, REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, ws);
  const ax = ws.rowVector('lasso.fitImage');
  A.apply(fit, ax);
  let resSq = 0;
  for (let i = 0; i < ax.length; i++) resSq += (ax[i]! - y[i]!) ** 2;
  return sigmaFromResidual(Math.sqrt(resSq), A.rows, count);
}
