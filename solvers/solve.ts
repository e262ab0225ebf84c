import type { LinearOperator } from '../operators/types.js';
import { allFinite, normSquared } from './complex.js';
import { basisPursuitMethod } from './basisPursuit.js';
import { cosampMethod, ihtMethod, ompMethod } from './greedy.js';
import { lassoMethod } from './lasso.js';
import { rmsColumnNorm } from './noise.js';
import type { MethodOutcome } from './outcome.js';
import { REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, refitOnSupport } from './refit.js';
import { reweightedL1Method } from './reweighted.js';
import type { SolverSettings } from './settings.js';
import { detectSupport, supportChange } from './support.js';
import type { SolveResult, WarmState } from './types.js';
import { workspaceFor, type Workspace } from './workspace.js';

/** Input that no solver can work on (wrong length, non-finite data). `field` names it. */
export class SolverInputError extends Error {
  override readonly name = 'SolverInputError';
  constructor(
    readonly field: string,
    message: string,
  ) {
    super(`${field}: ${message}`);
  }
}

/**
 * Recovers x from y ≈ A x with the method the settings name, then (unless `refit` is off) fits
 * least squares on the detected support, and returns the estimate with its evidence and the
 * warm state for the next frame.
 *
 * `warm` may come from any method; parts that do not fit this operator (wrong length,
 * non-finite) are ignored. The warm state returned holds the method's own iterate (before the
 * refit), which is the better start for the same method on the next frame.
 *
 * `noiseSigma` is this frame's noise level: the root-mean-square noise per complex measurement,
 * E|e_i|² = σ² (noise.ts). It drives the λ and ε rules and the greedy stopping rule.
 *
 * Deterministic: the same inputs give bit-identical outputs. After the first call on an
 * operator, a call allocates only its result arrays (scratch lives in the operator's workspace),
 * and not even those when `buffers` are given.
 */
export function solve(
  A: LinearOperator,
  y: Float64Array,
  settings: SolverSettings,
  warm?: WarmState,
  noiseSigma?: number,
  buffers?: SolveBuffers,
): SolveResult {
  checkInputs(A, y, noiseSigma);
  const ws = workspaceFor(A);
  const usableWarm = usableWarmState(warm, A);
  const x = buffers?.x ?? new Float64Array(2 * A.cols);
  if (x.length !== 2 * A.cols) throw new SolverInputError('buffers.x', `has length ${x.length}, expected ${2 * A.cols}`);
  if (usableWarm?.x !== undefined) x.set(usableWarm.x);
  else x.fill(0);
  const outcome = runMethod(A, y, settings, usableWarm, noiseSigma, ws, x);
  const iterate = buffers === undefined ? x.slice() : spareIterate(buffers, warm, x);

  const supportBuffer = ws.colIndices('solve.support');
  const floor = noiseFloor(A, settings, outcome, noiseSigma, ws);
  let count = detectSupport(x, settings.supportThreshold, supportBuffer, floor);
  const evidence = outcome.evidence;
  if (settings.refit && !outcome.fitted && count > 0) {
    if (count < A.rows) {
      const fit = refitOnSupport(A, y, supportBuffer, count, x, REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, ws);
      evidence['refit_iterations'] = fit.iterations;
      count = detectSupport(x, settings.supportThreshold, supportBuffer, floor);
    } else {
      // As many columns as equations: a fit would interpolate the noise. Keep the l1 answer.
      evidence['refit_skipped'] = 1;
    }
  }
  const support = supportBuffer.slice(0, count);

  const ax = ws.rowVector('solve.ax');
  A.apply(x, ax);
  let resSq = 0;
  for (let i = 0; i < ax.length; i++) resSq += (ax[i]! - y[i]!) ** 2;
  const residualNorm = Math.sqrt(resSq);
  const yNorm = Math.sqrt(normSquared(y));
  return {
    x,
    support,
    iterations: outcome.iterations,
    residualNorm,
    relativeResidual: yNorm > 0 ? residualNorm / yNorm : 0,
    certificate: outcome.certificate,
    converged: outcome.converged,
    supportChange: supportChange(warm?.support, support),
    warm: { ...outcome.warm, x: iterate, support },
    evidence,
  };
}

/**
 * The smallest coefficient the noise does not explain: σ·NOISE_FLOOR_FACTOR/c̄ when a noise level
 * is known (the frame's, the settings', or LASSO's estimate). A least-squares coefficient of
 * column j carries noise of standard deviation σ/‖a_j‖, so entries below it are not evidence.
 */
function noiseFloor(
  A: LinearOperator,
  settings: SolverSettings,
  outcome: MethodOutcome,
  noiseSigma: number | undefined,
  ws: Workspace,
): number {
  const sigma = noiseSigma ?? settings.noiseSigma ?? outcome.evidence['noise_sigma_estimate'];
  if (sigma === undefined || sigma === 0) return 0;
  return (NOISE_FLOOR_FACTOR * sigma) / rmsColumnNorm(A, ws);
}

/** Two standard deviations: a coefficient that small is as likely noise as signal. */
const NOISE_FLOOR_FACTOR = 2;

function runMethod(
  A: LinearOperator,
  y: Float64Array,
  settings: SolverSettings,
  warm: WarmState | undefined,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  switch (settings.method) {
    case 'lasso':
      return lassoMethod(A, y, settings, warm, sigma, ws, x);
    case 'basis_pursuit':
      return basisPursuitMethod(A, y, settings, warm, sigma, ws, x);
    case 'reweighted_l1':
      return reweightedL1Method(A, y, settings, warm, sigma, ws, x);
    case 'omp':
      return ompMethod(A, y, settings, sigma, ws, x);
    case 'cosamp':
      return cosampMethod(A, y, settings, sigma, ws, x);
    case 'iht':
      return ihtMethod(A, y, settings, sigma, ws, x);
  }
}

function checkInputs(A: LinearOperator, y: Float64Array, noiseSigma: number | undefined): void {
  if (!(y instanceof Float64Array)) throw new SolverInputError('y', 'must be a Float64Array');
  if (y.length !== 2 * A.rows) {
    throw new SolverInputError('y', `has ${y.length} values, the operator expects ${2 * A.rows} (${A.rows} complex)`);
  }
  if (!allFinite(y)) throw new SolverInputError('y', 'contains a non-finite value');
  if (noiseSigma !== undefined && !(Number.isFinite(noiseSigma) && noiseSigma >= 0)) {
    throw new SolverInputError('noiseSigma', `must be a finite number ≥ 0, got ${noiseSigma}`);
  }
  if (!(A.normBound > 0 && Number.isFinite(A.normBound))) {
    throw new SolverInputError('operator.normBound', `must be a finite positive bound, got ${A.normBound}`);
  }
}

/**
 * Arrays a caller that solves frame after frame owns and lends to every solve, so that steady
 * solving allocates nothing per frame (a long-lived daemon's collector then has nothing to
 * promote): the result's `x` is `x`, and the warm state's iterate alternates between the two
 * `iterates`. Both are overwritten by the next solve given them: use the result before that.
 */
export interface SolveBuffers {
  x: Float64Array;
  iterates: [Float64Array, Float64Array];
}

/** A copy of `x` in whichever lent iterate buffer the warm state given is not holding. */
function spareIterate(buffers: SolveBuffers, warm: WarmState | undefined, x: Float64Array): Float64Array {
  const [a, b] = buffers.iterates;
  const spare = warm?.x === a ? b : a;
  if (spare.length !== x.length) throw new SolverInputError('buffers.iterates', `have length ${spare.length}, expected ${x.length}`);
  spare.set(x);
  return spare;
}

/** The parts of a warm state that fit this operator. */
function usableWarmState(warm: WarmState | undefined, A: LinearOperator): WarmState | undefined {
  if (warm === undefined) return undefined;
  const out: WarmState = {};
  if (warm.x !== undefined && warm.x.length === 2 * A.cols && allFinite(warm.x)) out.x = warm.x;
  if (warm.dual !== undefined && warm.dual.length === 2 * A.rows && allFinite(warm.dual)) out.dual = warm.dual;
  if (warm.lambda !== undefined && Number.isFinite(warm.lambda) && warm.lambda > 0) out.lambda = warm.lambda;
  if (warm.step !== undefined && Number.isFinite(warm.step) && warm.step > 0) out.step = warm.step;
  if (warm.support !== undefined) out.support = warm.support;
  const gram = warm.gram;
  if (
    gram !== undefined &&
    gram.matrix.length === 2 * gram.support.length * gram.support.length &&
    gram.support.every((j, k) => j >= 0 && j < A.cols && (k === 0 || j > gram.support[k - 1]!)) &&
    allFinite(gram.matrix)
  ) {
    out.gram = gram;
  }
  return out;
}
