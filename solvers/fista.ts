import type { LinearOperator } from '../operators/types.js';
import { weightedL1Norm, weightedMaxModulus } from './complex.js';
import type { Workspace } from './workspace.js';

/**
 * FISTA (Beck & Teboulle, SIAM J. Imaging Sci. 2(1), 2009) for the weighted LASSO
 *   min_x ½‖A x − y‖² + λ Σ_j w_j |x_j|        (w ≡ 1 without weights)
 * over complex x, with the gradient-based adaptive restart of O'Donoghue & Candès (Found.
 * Comput. Math. 15(3), 2015) and a relative duality gap as the stopping certificate.
 *
 * The gap is evaluated at every prox output x_k at no extra operator cost: instead of applying
 * A to the extrapolated point z_k we apply it to x_k and obtain A z_k and Aᴴ(A z_k − y) by
 * linearity from the two latest iterates. So each iteration costs one apply and one adjoint,
 * and the certificate belongs to the very iterate that is returned.
 */

export interface FistaOptions {
  lambda: number;
  weights: Float64Array | null;
  maxIterations: number;
  /** Stop when (P − D)/P ≤ tolerance. */
  tolerance: number;
  /** Stop when ‖x_k − x_{k−1}‖ ≤ stepTolerance · ‖x_k‖. */
  stepTolerance: number;
  restart: boolean;
}

export interface FistaOutcome {
  iterations: number;
  /** Relative duality gap (P − D)/P at the returned x (0 when P = 0). */
  relGap: number;
  stoppedBy: 'gap' | 'step' | 'cap';
}

/**
 * Runs FISTA from the x given (in place: x holds the estimate on return).
 * ‖A‖² ≤ normBound² bounds the Lipschitz constant of the smooth part, so the step is 1/normBound².
 */
export function fista(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  opts: FistaOptions,
  ws: Workspace,
): FistaOutcome {
  const { lambda, weights } = opts;
  const step = 1 / (A.normBound * A.normBound);
  const thresh = step * lambda;

  // Three rotating iterate buffers and two rotating buffers for A x and Aᴴ(A x − y).
  let cur = ws.colVector('fista.x0');
  let prev = ws.colVector('fista.x1');
  let next = ws.colVector('fista.x2');
  let axCur = ws.rowVector('fista.ax0');
  let axPrev = ws.rowVector('fista.ax1');
  let gCur = ws.colVector('fista.g0');
  let gPrev = ws.colVector('fista.g1');
  const r = ws.rowVector('fista.r');
  cur.set(x);

  let relGap = residualAndGap(A, y, cur, weightedL1Norm(cur, weights), axCur, r, gCur, opts);
  prev.set(cur);
  axPrev.set(axCur);
  gPrev.set(gCur);

  let t = 1;
  let iterations = 0;
  let stoppedBy: FistaOutcome['stoppedBy'] = 'cap';
  if (relGap <= opts.tolerance) stoppedBy = 'gap';
  while (stoppedBy === 'cap' && iterations < opts.maxIterations) {
    const tNext = (1 + Math.sqrt(1 + 4 * t * t)) / 2;
    const beta = (t - 1) / tNext;
    let restartSignal = 0;
    let stepSq = 0;
    let normSq = 0;
    let l1 = 0;
    for (let j = 0, i = 0; i < cur.length; j++, i += 2) {
      const cRe = cur[i]!;
      const cIm = cur[i + 1]!;
      const zRe = cRe + beta * (cRe - prev[i]!);
      const zIm = cIm + beta * (cIm - prev[i + 1]!);
      const gRe = gCur[i]! + beta * (gCur[i]! - gPrev[i]!);
      const gIm = gCur[i + 1]! + beta * (gCur[i + 1]! - gPrev[i + 1]!);
      const uRe = zRe - step * gRe;
      const uIm = zIm - step * gIm;
      const w = weights === null ? 1 : weights[j]!;
      const mod = Math.sqrt(uRe * uRe + uIm * uIm);
      const tj = thresh * w;
      let nRe = 0;
      let nIm = 0;
      if (mod > tj) {
        const f = 1 - tj / mod;
        nRe = f * uRe;
        nIm = f * uIm;
        l1 += w * (mod - tj);
      }
      next[i] = nRe;
      next[i + 1] = nIm;
      const dRe = nRe - cRe;
      const dIm = nIm - cIm;
      restartSignal += (zRe - nRe) * dRe + (zIm - nIm) * dIm;
      stepSq += dRe * dRe + dIm * dIm;
      normSq += nRe * nRe + nIm * nIm;
    }
    // Rotate: prev ← cur, cur ← next, and the freed buffer becomes the next output.
    const spare = prev;
    prev = cur;
    cur = next;
    next = spare;
    const axSpare = axPrev;
    axPrev = axCur;
    axCur = axSpare;
    const gSpare = gPrev;
    gPrev = gCur;
    gCur = gSpare;

    relGap = residualAndGap(A, y, cur, l1, axCur, r, gCur, opts);
    iterations++;
    // Restart when the momentum points against the step just taken.
    t = opts.restart && restartSignal > 0 ? 1 : tNext;
    if (relGap <= opts.tolerance) stoppedBy = 'gap';
    else if (Math.sqrt(stepSq) <= opts.stepTolerance * Math.sqrt(normSq)) stoppedBy = 'step';
  }
  x.set(cur);
  return { iterations, relGap, stoppedBy };
}

/**
 * Computes ax = A x, r = A x − y, g = Aᴴ r and returns the relative duality gap at x.
 * Dual point u = s·(y − A x) with s = min(1, λ / max_j |g_j|/w_j), so that |(Aᴴu)_j| ≤ λ w_j;
 * D(u) = ½‖y‖² − ½‖y − u‖² = −s Re⟨y, r⟩ − ½ s²‖r‖².
 */
function residualAndGap(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  weightedL1: number,
  ax: Float64Array,
  r: Float64Array,
  g: Float64Array,
  opts: FistaOptions,
): number {
  A.apply(x, ax);
  let rNormSq = 0;
  let yDotR = 0;
  for (let i = 0; i < r.length; i++) {
    const ri = ax[i]! - y[i]!;
    r[i] = ri;
    rNormSq += ri * ri;
    yDotR += y[i]! * ri;
  }
  A.adjoint(r, g);
  const dualNorm = weightedMaxModulus(g, opts.weights);
  const s = dualNorm > opts.lambda ? opts.lambda / dualNorm : 1;
  const primal = 0.5 * rNormSq + opts.lambda * weightedL1;
  const dual = -s * yDotR - 0.5 * s * s * rNormSq;
  return primal > 0 ? Math.max(0, primal - dual) / primal : 0;
}
