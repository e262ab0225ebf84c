import type { LinearOperator } from '../operators/types.js';
import { weightedL1Norm, weightedMaxModulus } from './complex.js';
import { restrictedNormalCg } from './refit.js';
import { DENSE_SUPPORT_LIMIT, gramFor, newtonOnGram } from './supportNewton.js';
import type { SupportGram } from './types.js';
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
 *
 * Finish on the support: once the support of the iterates has stood still for one iteration
 * (and at once for a warm start, whose support comes from the previous frame), the
 * LASSO optimality condition restricted to that support S,
 *   F(x_S) = A_Sᴴ(A_S x_S − y) + λ w_S ∘ x_S/|x_S| = 0,
 * is solved by Newton's method: each step solves (A_SᴴA_S + B) δ = −F, where B, the derivative of
 * x ↦ λ w x/|x|, is λ w/|x_j| times the projection orthogonal to x_j's phase (a 2×2 block per
 * complex entry; no change for real entries). Up to 64 columns the steps run on the Gram matrix
 * A_SᴴA_S alone (supportNewton.ts) until F vanishes to rounding; the Gram matrix is built from k
 * applies and carried to the next frame. Beyond 64 columns, or if the dense matrix is singular,
 * each step is a CG solve through the operator, at most three. The result is kept only if it
 * lowers the LASSO objective, and its duality gap is evaluated like any iterate's; FISTA then
 * continues from it with fresh momentum. Counted as iterations: each evaluation and each CG
 * step (one apply and one adjoint each), and half an iteration per apply spent on a Gram matrix
 * (rounded up).
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
  /** Try the finish on the support described above. */
  finish: boolean;
  /** A Gram matrix from the previous frame (used when the support matches). */
  gram?: SupportGram | undefined;
}

export interface FistaOutcome {
  iterations: number;
  /** Relative duality gap (P − D)/P at the returned x (0 when P = 0). */
  relGap: number;
  stoppedBy: 'gap' | 'step' | 'cap';
  /** Iterations spent in finishes on the support (included in `iterations`). */
  finishIterations: number;
  /** The Gram matrix the last dense finish used (to carry to the next frame). */
  gram: SupportGram | undefined;
}

/**
 * An iterate's evaluation: primal objective P = ½‖A x − y‖² + λ Σ w|x|, the parts of the dual
 * objective, and (once the dual norm is known) the relative duality gap.
 */
interface Evaluation {
  relGap: number;
  primal: number;
  residualSq: number;
  yDotResidual: number;
}

/** Iterations of unchanged support before a finish is tried. */
const FINISH_AFTER_STABLE = 1;
const FINISH_ROUNDS = 3;
/** Relative reduction of the restricted optimality residual asked of each Newton step's CG. */
const FINISH_CG_REDUCTION = 1e-4;

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

  const evaluation: Evaluation = { relGap: Infinity, primal: Infinity, residualSq: 0, yDotResidual: 0 };
  residualAndObjective(A, y, cur, weightedL1Norm(cur, weights), axCur, r, gCur, opts, evaluation);
  const sums: StepSums = { restartSignal: 0, stepSq: 0, normSq: 0, l1: 0, nonzeros: 0, indexSum: 0, supportChanged: false, dualNorm: 0 };
  for (let j = 0; 2 * j < cur.length; j++) {
    if (cur[2 * j] !== 0 || cur[2 * j + 1] !== 0) {
      sums.nonzeros++;
      sums.indexSum += j;
    }
  }
  let t = 1;
  let iterations = 0;
  let finishIterations = 0;
  // A nonzero start (a warm start) brings its support along: try the finish at once.
  let stableFor = sums.nonzeros > 0 ? FINISH_AFTER_STABLE : 0;
  let finishTried = false;
  const finishState: FinishState = { gram: opts.gram, iterations: 0, accepted: false };
  let stoppedBy: FistaOutcome['stoppedBy'] = 'cap';
  for (;;) {
    // With t = 1 the extrapolation weight β is 0, so whatever prev holds is ignored.
    const tNext = (1 + Math.sqrt(1 + 4 * t * t)) / 2;
    const beta = (t - 1) / tNext;
    // The pass proposes the next iterate and, reading Aᴴ(A x − y) on its way, completes the
    // current iterate's duality gap: the stopping test comes one pass late, at no extra sweep.
    proxGradientStep(cur, prev, gCur, gPrev, next, beta, step, thresh, weights, sums);
    completeGap(evaluation, sums.dualNorm, lambda);
    if (evaluation.relGap <= opts.tolerance) {
      stoppedBy = 'gap';
      break;
    }
    if (opts.finish && !finishTried && stableFor >= FINISH_AFTER_STABLE && iterations < opts.maxIterations) {
      finishTried = true;
      finishOnSupport(A, y, cur, axCur, gCur, opts, evaluation, opts.maxIterations - iterations, ws, finishState);
      iterations += finishState.iterations;
      finishIterations += finishState.iterations;
      if (finishState.accepted) {
        t = 1; // fresh momentum from the finished point, whose next step is proposed anew
        if (evaluation.relGap <= opts.tolerance) {
          stoppedBy = 'gap';
          break;
        }
        continue;
      }
    }
    if (iterations >= opts.maxIterations) break;
    if (Math.sqrt(sums.stepSq) <= opts.stepTolerance * Math.sqrt(sums.normSq)) {
      stoppedBy = 'step';
      break;
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
    residualAndObjective(A, y, cur, sums.l1, axCur, r, gCur, opts, evaluation);
    iterations++;
    // Restart when the momentum points against the step just taken.
    t = opts.restart && sums.restartSignal > 0 ? 1 : tNext;
    if (!sums.supportChanged) stableFor++;
    else {
      stableFor = 0;
      finishTried = false;
    }
  }
  x.set(cur);
  return { iterations, relGap: evaluation.relGap, stoppedBy, finishIterations, gram: finishState.gram };
}

/** What one proximal-gradient pass measures on its way. */
interface StepSums {
  /** Re⟨z − x_next, x_next − x⟩: positive means the momentum works against the step. */
  restartSignal: number;
  stepSq: number;
  normSq: number;
  /** Σ w |x_next|. */
  l1: number;
  nonzeros: number;
  indexSum: number;
  supportChanged: boolean;
  /** max_j |g_j|/w_j of the gradient the pass read (the dual norm that scales the dual point). */
  dualNorm: number;
}

/**
 * next ← soft(z − step·g_z, step·λ·w) with z = cur + β(cur − prev) and g_z by linearity from
 * gCur and gPrev. Its own function so that the engine optimises this loop on its own.
 */
function proxGradientStep(
  cur: Float64Array,
  prev: Float64Array,
  gCur: Float64Array,
  gPrev: Float64Array,
  next: Float64Array,
  beta: number,
  step: number,
  thresh: number,
  weights: Float64Array | null,
  sums: StepSums,
): void {
  let restartSignal = 0;
  let stepSq = 0;
  let normSq = 0;
  let l1 = 0;
  let nonzeros = 0;
  let indexSum = 0;
  let dualSq = 0;
  for (let j = 0, i = 0; i < cur.length; j++, i += 2) {
    const cRe = cur[i]!;
    const cIm = cur[i + 1]!;
    const zRe = cRe + beta * (cRe - prev[i]!);
    const zIm = cIm + beta * (cIm - prev[i + 1]!);
    const hRe = gCur[i]!;
    const hIm = gCur[i + 1]!;
    const gRe = hRe + beta * (hRe - gPrev[i]!);
    const gIm = hIm + beta * (hIm - gPrev[i + 1]!);
    const uRe = zRe - step * gRe;
    const uIm = zIm - step * gIm;
    const w = weights === null ? 1 : weights[j]!;
    const h = (hRe * hRe + hIm * hIm) / (w * w);
    if (h > dualSq) dualSq = h;
    const tj = thresh * w;
    const q = uRe * uRe + uIm * uIm;
    if (q > tj * tj) {
      const mod = Math.sqrt(q);
      const f = 1 - tj / mod;
      const nRe = f * uRe;
      const nIm = f * uIm;
      next[i] = nRe;
      next[i + 1] = nIm;
      l1 += w * (mod - tj);
      nonzeros++;
      indexSum += j;
      const dRe = nRe - cRe;
      const dIm = nIm - cIm;
      restartSignal += (zRe - nRe) * dRe + (zIm - nIm) * dIm;
      stepSq += dRe * dRe + dIm * dIm;
      normSq += nRe * nRe + nIm * nIm;
    } else {
      // Most entries of a sparse iterate land here: zero, and they add to the sums only if
      // they were nonzero before (no square root, nothing to accumulate otherwise).
      next[i] = 0;
      next[i + 1] = 0;
      if (cRe !== 0 || cIm !== 0) {
        restartSignal -= zRe * cRe + zIm * cIm;
        stepSq += cRe * cRe + cIm * cIm;
      }
    }
  }
  sums.dualNorm = Math.sqrt(dualSq);
  sums.restartSignal = restartSignal;
  sums.stepSq = stepSq;
  sums.normSq = normSq;
  sums.l1 = l1;
  // Count and index sum of the support: equal for two iterates means (almost surely) the same
  // support; a rare false match only brings a finish attempt forward, which is verified anyway.
  sums.supportChanged = nonzeros !== sums.nonzeros || indexSum !== sums.indexSum;
  sums.nonzeros = nonzeros;
  sums.indexSum = indexSum;
}

interface FinishState {
  gram: SupportGram | undefined;
  iterations: number;
  accepted: boolean;
}

/**
 * The finish on the support (see the top of this file). Works in place on x, A x and
 * g = Aᴴ(A x − y), which it replaces only by a point of lower objective; `evaluation` follows.
 */
function finishOnSupport(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  ax: Float64Array,
  g: Float64Array,
  opts: FistaOptions,
  evaluation: Evaluation,
  budget: number,
  ws: Workspace,
  state: FinishState,
): void {
  state.iterations = 0;
  state.accepted = false;
  const support = ws.colIndices('fista.support');
  let count = 0;
  for (let j = 0; 2 * j < x.length; j++) if (x[2 * j] !== 0 || x[2 * j + 1] !== 0) support[count++] = j;
  if (count === 0 || count >= A.rows) return;
  let gram: SupportGram | undefined;
  if (count <= DENSE_SUPPORT_LIMIT) {
    const built = gramFor(A, support, count, state.gram, ws);
    gram = built.gram;
    state.gram = gram;
    state.iterations += Math.ceil(built.applies / 2);
  }
  const candidate = ws.colVector('fista.finishX');
  const candidateAx = ws.rowVector('fista.finishAx');
  const candidateG = ws.colVector('fista.finishG');
  const r = ws.rowVector('fista.r');
  const trial: Evaluation = { relGap: Infinity, primal: Infinity, residualSq: 0, yDotResidual: 0 };
  const xs = ws.colVector('fista.finishXs');
  const gs = ws.colVector('fista.finishGs');
  const rounds = gram === undefined ? FINISH_ROUNDS : 1;
  for (let round = 0; round < rounds && state.iterations + count + 1 < budget; round++) {
    for (let k = 0; k < count; k++) {
      const j = support[k]!;
      xs[2 * k] = x[2 * j]!;
      xs[2 * k + 1] = x[2 * j + 1]!;
      gs[2 * k] = g[2 * j]!;
      gs[2 * k + 1] = g[2 * j + 1]!;
    }
    if (gram === undefined || !newtonOnGram(gram, opts.lambda, opts.weights, xs, gs, ws)) {
      if (gram !== undefined) {
        // The dense path failed: restart from x with conjugate gradients.
        for (let k = 0; k < count; k++) {
          xs[2 * k] = x[2 * support[k]!]!;
          xs[2 * k + 1] = x[2 * support[k]! + 1]!;
        }
      }
      state.iterations += newtonStepByCg(A, support, count, xs, g, opts, ws);
    }
    candidate.fill(0);
    let l1 = 0;
    for (let k = 0; k < count; k++) {
      const j = support[k]!;
      const re = xs[2 * k]!;
      const im = xs[2 * k + 1]!;
      candidate[2 * j] = re;
      candidate[2 * j + 1] = im;
      l1 += (opts.weights === null ? 1 : opts.weights[j]!) * Math.sqrt(re * re + im * im);
    }
    evaluate(A, y, candidate, l1, candidateAx, r, candidateG, opts, trial);
    state.iterations += 1;
    if (!(trial.primal < evaluation.primal)) break;
    x.set(candidate);
    ax.set(candidateAx);
    g.set(candidateG);
    evaluation.relGap = trial.relGap;
    evaluation.primal = trial.primal;
    evaluation.residualSq = trial.residualSq;
    evaluation.yDotResidual = trial.yDotResidual;
    state.accepted = true;
    if (trial.relGap <= opts.tolerance) break;
  }
}

/**
 * One Newton step for the restricted condition by conjugate gradients through the operator
 * (supports too large for the dense path): xs (compact) moves by δ solving (A_SᴴA_S + B) δ = −F,
 * with F from xs and the full gradient g. Returns the CG iterations spent.
 */
function newtonStepByCg(
  A: LinearOperator,
  support: Int32Array,
  count: number,
  xs: Float64Array,
  g: Float64Array,
  opts: FistaOptions,
  ws: Workspace,
): number {
  const rhs = ws.colVector('fista.finishRhs');
  const blocks = ws.colReals('fista.finishBlocks');
  const delta = ws.colVector('fista.finishDelta');
  // −F(x_S), and the blocks of B: (λ w/|x|)(I − û ûᵀ) with û = (re, im)/|x|.
  let rhsSq = 0;
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    const re = xs[2 * k]!;
    const im = xs[2 * k + 1]!;
    const modSq = re * re + im * im;
    const f = (opts.lambda * (opts.weights === null ? 1 : opts.weights[j]!)) / Math.sqrt(modSq);
    rhs[2 * k] = -(g[2 * j]! + f * re);
    rhs[2 * k + 1] = -(g[2 * j + 1]! + f * im);
    rhsSq += rhs[2 * k]! ** 2 + rhs[2 * k + 1]! ** 2;
    blocks[3 * k] = (f * im * im) / modSq;
    blocks[3 * k + 1] = (-f * re * im) / modSq;
    blocks[3 * k + 2] = (f * re * re) / modSq;
  }
  const cg = restrictedNormalCg(A, support, count, rhs, delta, count + 10, FINISH_CG_REDUCTION * Math.sqrt(rhsSq), ws, blocks);
  for (let i = 0; i < 2 * count; i++) xs[i] = xs[i]! + delta[i]!;
  return cg.iterations;
}

/**
 * Computes ax = A x, r = A x − y, g = Aᴴ r, the primal objective and the parts of the dual
 * objective at x (into `out`); completeGap adds the duality gap once max_j |g_j|/w_j is known.
 */
function residualAndObjective(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  weightedL1: number,
  ax: Float64Array,
  r: Float64Array,
  g: Float64Array,
  opts: FistaOptions,
  out: Evaluation,
): void {
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
  out.residualSq = rNormSq;
  out.yDotResidual = yDotR;
  out.primal = 0.5 * rNormSq + opts.lambda * weightedL1;
  out.relGap = Infinity;
}

/**
 * Relative duality gap: dual point u = s·(y − A x) with s = min(1, λ / max_j |g_j|/w_j), so that
 * |(Aᴴu)_j| ≤ λ w_j; D(u) = ½‖y‖² − ½‖y − u‖² = −s Re⟨y, r⟩ − ½ s²‖r‖².
 */
function completeGap(e: Evaluation, dualNorm: number, lambda: number): void {
  const s = dualNorm > lambda ? lambda / dualNorm : 1;
  const dual = -s * e.yDotResidual - 0.5 * s * s * e.residualSq;
  e.relGap = e.primal > 0 ? Math.max(0, e.primal - dual) / e.primal : 0;
}

/** A full evaluation of x, dual norm included (for points off the main iteration). */
function evaluate(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  weightedL1: number,
  ax: Float64Array,
  r: Float64Array,
  g: Float64Array,
  opts: FistaOptions,
  out: Evaluation,
): void {
  residualAndObjective(A, y, x, weightedL1, ax, r, g, opts, out);
  completeGap(out, weightedMaxModulus(g, opts.weights), opts.lambda);
}
