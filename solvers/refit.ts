import type { LinearOperator } from '../operators/types.js';
import type { Workspace } from './workspace.js';

/**
 * Least squares on a support: the operator restricted to the columns S is applied through the
 * full operator, with every off-support entry of its input held at zero. Conjugate gradients
 * on the normal equations A_Sᴴ A_S δ = rhs (Hestenes & Stiefel 1952) need only apply/adjoint.
 *
 * Vectors "on S" are compact: entry k (interleaved) belongs to column support[k].
 */

/** Limits of every least-squares fit on a detected support (refits, noise estimates, greedy steps). */
export const REFIT_MAX_ITERATIONS = 200;
export const REFIT_TOLERANCE = 1e-13;

export interface CgOutcome {
  iterations: number;
  /** ‖rhs − A_Sᴴ A_S δ‖ at exit (recursively updated residual). */
  residualNorm: number;
}

/**
 * Solves (A_Sᴴ A_S + B) δ = rhs for δ on S, starting from δ = 0. Stops when the residual is at
 * most absTol or after maxIterations. rhs and delta are compact (length ≥ 2·count). B, when
 * given, is block diagonal with one symmetric positive semidefinite 2×2 block per entry (acting
 * on its real and imaginary parts), stored as (b11, b12, b22) in blocks[3k..3k+2].
 */
export function restrictedNormalCg(
  A: LinearOperator,
  support: Int32Array,
  count: number,
  rhs: Float64Array,
  delta: Float64Array,
  maxIterations: number,
  absTol: number,
  ws: Workspace,
  blocks: Float64Array | null = null,
): CgOutcome {
  const len = 2 * count;
  const r = ws.colVector('cg.r');
  const pFull = ws.colVector('cg.pFull');
  const ap = ws.rowVector('cg.ap');
  const aap = ws.colVector('cg.aap');
  pFull.fill(0);
  let gamma = 0;
  for (let i = 0; i < len; i++) {
    delta[i] = 0;
    r[i] = rhs[i]!;
    gamma += r[i]! * r[i]!;
  }
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    pFull[2 * j] = r[2 * k]!;
    pFull[2 * j + 1] = r[2 * k + 1]!;
  }
  let iterations = 0;
  while (Math.sqrt(gamma) > absTol && iterations < maxIterations) {
    A.apply(pFull, ap);
    let curvature = 0;
    for (let i = 0; i < ap.length; i++) curvature += ap[i]! * ap[i]!;
    if (blocks !== null) {
      for (let k = 0; k < count; k++) {
        const j = support[k]!;
        const pr = pFull[2 * j]!;
        const pi = pFull[2 * j + 1]!;
        curvature += blocks[3 * k]! * pr * pr + 2 * blocks[3 * k + 1]! * pr * pi + blocks[3 * k + 2]! * pi * pi;
      }
    }
    if (!(curvature > 0)) break; // p lies in the null space: nothing more to gain.
    A.adjoint(ap, aap);
    if (blocks !== null) {
      for (let k = 0; k < count; k++) {
        const j = support[k]!;
        const pr = pFull[2 * j]!;
        const pi = pFull[2 * j + 1]!;
        aap[2 * j] = aap[2 * j]! + blocks[3 * k]! * pr + blocks[3 * k + 1]! * pi;
        aap[2 * j + 1] = aap[2 * j + 1]! + blocks[3 * k + 1]! * pr + blocks[3 * k + 2]! * pi;
      }
    }
    const alpha = gamma / curvature;
    let gammaNext = 0;
    for (let k = 0; k < count; k++) {
      const j = support[k]!;
      const re = 2 * k;
      const im = re + 1;
      delta[re] = delta[re]! + alpha * pFull[2 * j]!;
      delta[im] = delta[im]! + alpha * pFull[2 * j + 1]!;
      r[re] = r[re]! - alpha * aap[2 * j]!;
      r[im] = r[im]! - alpha * aap[2 * j + 1]!;
      gammaNext += r[re]! * r[re]! + r[im]! * r[im]!;
    }
    const beta = gammaNext / gamma;
    gamma = gammaNext;
    for (let k = 0; k < count; k++) {
      const j = support[k]!;
      pFull[2 * j] = r[2 * k]! + beta * pFull[2 * j]!;
      pFull[2 * j + 1] = r[2 * k + 1]! + beta * pFull[2 * j + 1]!;
    }
    iterations++;
  }
  return { iterations, residualNorm: Math.sqrt(gamma) };
}

export interface RefitOutcome {
  iterations: number;
  /** ‖A_Sᴴ (y − A x)‖ / (‖A‖·‖y‖) at exit: the relative stationarity of the least-squares fit. */
  relStationarity: number;
}

/**
 * Replaces x by the least-squares fit min ‖A x − y‖₂ over vectors supported on S, starting from
 * x's own entries on S (entries off S are set to zero). With y = A x₀ exactly and S ⊇ supp(x₀),
 * A_S injective, the answer is x₀ itself: this undoes the shrinkage of l1 methods.
 */
export function refitOnSupport(
  A: LinearOperator,
  y: Float64Array,
  support: Int32Array,
  count: number,
  x: Float64Array,
  maxIterations: number,
  relTol: number,
  ws: Workspace,
): RefitOutcome {
  keepOnly(x, support, count);
  const residual = ws.rowVector('refit.residual');
  const grad = ws.colVector('refit.grad');
  const rhs = ws.colVector('refit.rhs');
  const delta = ws.colVector('refit.delta');
  A.apply(x, residual);
  for (let i = 0; i < residual.length; i++) residual[i] = y[i]! - residual[i]!;
  A.adjoint(residual, grad);
  gatherOnSupport(grad, support, count, rhs);
  let yNorm = 0;
  for (let i = 0; i < y.length; i++) yNorm += y[i]! * y[i]!;
  const scale = A.normBound * Math.sqrt(yNorm);
  if (scale === 0) return { iterations: 0, relStationarity: 0 };
  const out = restrictedNormalCg(A, support, count, rhs, delta, maxIterations, relTol * scale, ws);
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    x[2 * j] = x[2 * j]! + delta[2 * k]!;
    x[2 * j + 1] = x[2 * j + 1]! + delta[2 * k + 1]!;
  }
  return { iterations: out.iterations, relStationarity: out.residualNorm / scale };
}

/** Zeroes every entry of x outside the ascending support S. */
export function keepOnly(x: Float64Array, support: Int32Array, count: number): void {
  let next = 0;
  for (let j = 0; 2 * j < x.length; j++) {
    if (next < count && support[next] === j) {
      next++;
      continue;
    }
    x[2 * j] = 0;
    x[2 * j + 1] = 0;
  }
}

/** compact[k] ← full[support[k]]. */
export function gatherOnSupport(full: Float64Array, support: Int32Array, count: number, compact: Float64Array): void {
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    compact[2 * k] = full[2 * j]!;
    compact[2 * k + 1] = full[2 * j + 1]!;
  }
}
