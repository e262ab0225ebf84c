import type { LinearOperator } from '../operators/types.js';
import type { Workspace } from './workspace.js';

/**
 * The first-order primal-dual method of Chambolle & Pock (J. Math. Imaging Vis. 40(1), 2011)
 * for weighted, noise-aware basis pursuit over complex x:
 *   min_x Σ_j w_j |x_j|   subject to   ‖A x − y‖₂ ≤ ε        (ε = 0: A x = y)
 * as the saddle point of Σ w|x| + Re⟨ν, A x⟩ − (Re⟨ν, y⟩ + ε‖ν‖). Its dual is
 *   max_ν −Re⟨ν, y⟩ − ε‖ν‖   subject to   |(Aᴴν)_j| ≤ w_j,
 * which gives the certificate: any ν scaled into that set bounds the optimum from below.
 *
 * Each iteration costs one adjoint (Aᴴν) and one apply (A x_new); A x̄ = 2A x_new − A x_old comes
 * by linearity. Steps τ = ω/‖A‖, σ = 1/(ω‖A‖) keep τσ‖A‖² < 1 for any primal weight ω.
 */

export interface PrimalDualOptions {
  epsilon: number;
  weights: Float64Array | null;
  maxIterations: number;
  /** Converged when the relative gap and the relative infeasibility are both at most this. */
  tolerance: number;
}

export interface PrimalDualState {
  iterations: number;
  /** |P − D| / P with D from the dual point scaled into the feasible set. */
  relGap: number;
  /** max(0, ‖A x − y‖ − ε) / ‖y‖. */
  infeasibility: number;
  /** max(0, max_j |(Aᴴν)_j|/w_j − 1): how far the raw dual iterate sits outside its set. */
  dualInfeasibility: number;
}

const STEP_SAFETY = 0.99;
/** Primal weight updates happen at least this many iterations apart... */
const MIN_SPAN = 16;
/** ...and at most this many apart... */
const MAX_SPAN = 128;
/** ...or as soon as the error has fallen to this fraction of its value at the last update. */
const SUFFICIENT_DECREASE = 0.3;

/**
 * One block of Chambolle–Pock iterations from (x, ν) (both in place), stopping when the
 * certificate meets the tolerance, after maxIterations, or when `onStableSupport` (called when
 * the support of x has not moved for a while) returns true.
 */
export function primalDual(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  nu: Float64Array,
  opts: PrimalDualOptions,
  primalWeight: number,
  ws: Workspace,
  onStableSupport: ((state: PrimalDualState) => boolean) | null,
): PrimalDualState {
  const { epsilon, weights } = opts;
  let omega = primalWeight;
  let tau = (STEP_SAFETY * omega) / A.normBound;
  let sigma = STEP_SAFETY / (omega * A.normBound);
  const xAnchor = ws.colVector('pd.xAnchor');
  const nuAnchor = ws.rowVector('pd.nuAnchor');
  xAnchor.set(x);
  nuAnchor.set(nu);
  let errorAtAnchor = Infinity;
  let sinceAnchor = 0;
  let ax = ws.rowVector('pd.ax0');
  let axPrev = ws.rowVector('pd.ax1');
  const g = ws.colVector('pd.g');
  const v = ws.rowVector('pd.v');
  let yNormSq = 0;
  for (let i = 0; i < y.length; i++) yNormSq += y[i]! * y[i]!;
  const yNorm = Math.sqrt(yNormSq);

  A.apply(x, ax);
  axPrev.set(ax);
  const state: PrimalDualState = { iterations: 0, relGap: Infinity, infeasibility: Infinity, dualInfeasibility: Infinity };
  let stableFor = 0;
  while (state.iterations < opts.maxIterations) {
    // Dual step: ν ← prox_{σF*}(ν + σ A x̄), F the indicator of the ball B(y, ε).
    let wNormSq = 0;
    let nuDotY = 0;
    for (let i = 0; i < v.length; i++) {
      const wi = nu[i]! + sigma * (2 * ax[i]! - axPrev[i]! - y[i]!);
      v[i] = wi;
      wNormSq += wi * wi;
    }
    const wNorm = Math.sqrt(wNormSq);
    const keep = epsilon === 0 ? 1 : wNorm > sigma * epsilon ? 1 - (sigma * epsilon) / wNorm : 0;
    let nuNormSq = 0;
    for (let i = 0; i < v.length; i++) {
      const ni = keep * v[i]!;
      nu[i] = ni;
      nuNormSq += ni * ni;
      nuDotY += ni * y[i]!;
    }
    // Primal step: x ← soft(x − τ Aᴴν, τ w).
    A.adjoint(nu, g);
    let dualPeakSq = 0;
    let primal = 0;
    let supportMoves = 0;
    for (let j = 0, i = 0; i < x.length; j++, i += 2) {
      const w = weights === null ? 1 : weights[j]!;
      const gRe = g[i]!;
      const gIm = g[i + 1]!;
      const q = (gRe * gRe + gIm * gIm) / (w * w);
      if (q > dualPeakSq) dualPeakSq = q;
      const xRe = x[i]!;
      const xIm = x[i + 1]!;
      const uRe = xRe - tau * gRe;
      const uIm = xIm - tau * gIm;
      const q2 = uRe * uRe + uIm * uIm;
      const t = tau * w;
      const wasZero = xRe === 0 && xIm === 0;
      if (q2 > t * t) {
        const mod = Math.sqrt(q2);
        const f = 1 - t / mod;
        x[i] = f * uRe;
        x[i + 1] = f * uIm;
        primal += w * (mod - t);
        if (wasZero) supportMoves++;
      } else {
        x[i] = 0;
        x[i + 1] = 0;
        if (!wasZero) supportMoves++;
      }
    }
    const axSpare = axPrev;
    axPrev = ax;
    ax = axSpare;
    A.apply(x, ax);
    let resSq = 0;
    for (let i = 0; i < ax.length; i++) {
      const ri = ax[i]! - y[i]!;
      resSq += ri * ri;
    }
    state.iterations++;

    // Certificate at (x, ν): scale ν into the dual set, compare objectives.
    const dualPeak = Math.sqrt(dualPeakSq);
    const s = dualPeak > 1 ? 1 / dualPeak : 1;
    const dual = s * (-nuDotY - epsilon * Math.sqrt(nuNormSq));
    state.relGap = primal > 0 ? Math.abs(primal - dual) / primal : dual === 0 ? 0 : Infinity;
    state.infeasibility = yNorm > 0 ? Math.max(0, Math.sqrt(resSq) - epsilon) / yNorm : 0;
    state.dualInfeasibility = Math.max(0, dualPeak - 1);
    if (state.relGap <= opts.tolerance && state.infeasibility <= opts.tolerance) break;

    // Primal weight update (Applegate et al., "Practical large-scale linear programming using
    // primal-dual hybrid gradient", NeurIPS 2021): after a sufficient decrease of the error, or
    // a fixed span, move ω halfway (in log scale) towards ‖Δx‖/‖Δν‖ since the last update.
    const error = Math.max(state.relGap, state.infeasibility);
    sinceAnchor++;
    if (sinceAnchor >= MIN_SPAN && (error <= SUFFICIENT_DECREASE * errorAtAnchor || sinceAnchor >= MAX_SPAN)) {
      let dx = 0;
      let dnu = 0;
      for (let i = 0; i < x.length; i++) dx += (x[i]! - xAnchor[i]!) ** 2;
      for (let i = 0; i < nu.length; i++) dnu += (nu[i]! - nuAnchor[i]!) ** 2;
      if (dx > 0 && dnu > 0 && Number.isFinite(errorAtAnchor)) {
        omega = Math.sqrt(omega * Math.sqrt(dx / dnu));
        tau = (STEP_SAFETY * omega) / A.normBound;
        sigma = STEP_SAFETY / (omega * A.normBound);
        axPrev.set(ax); // restart the extrapolation with the new steps
      }
      xAnchor.set(x);
      nuAnchor.set(nu);
      errorAtAnchor = error;
      sinceAnchor = 0;
    }

    stableFor = supportMoves === 0 ? stableFor + 1 : 0;
    if (onStableSupport !== null && isHookPoint(stableFor) && onStableSupport(state)) break;
  }
  // Leave A x of the returned x where callers can find it.
  ws.rowVector('pd.axOut').set(ax);
  return state;
}

/** Iterations the support must stay put before the caller's hook (e.g. a polish) is tried. */
const STABLE_SUPPORT_ITERATIONS = 20;

/**
 * The hook runs after 20, 40, 80, 160, ... iterations of a still support: a failed polish is
 * retried with a better dual point, at a cost that stays a small share of the iterations.
 */
function isHookPoint(stableFor: number): boolean {
  if (stableFor < STABLE_SUPPORT_ITERATIONS || stableFor % STABLE_SUPPORT_ITERATIONS !== 0) return false;
  const k = stableFor / STABLE_SUPPORT_ITERATIONS;
  return (k & (k - 1)) === 0;
}
