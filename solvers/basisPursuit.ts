import type { LinearOperator } from '../operators/types.js';
import { allFinite, normSquared, weightedMaxModulus } from './complex.js';
import { epsilonFromNoise } from './noise.js';
import type { MethodOutcome } from './outcome.js';
import { primalDual, type PrimalDualState } from './primalDual.js';
import { gatherOnSupport, keepOnly, refitOnSupport, restrictedNormalCg } from './refit.js';
import { detectSupport } from './support.js';
import type { BasisPursuitSettings } from './settings.js';
import type { WarmState } from './types.js';
import type { Workspace } from './workspace.js';

/**
 * Basis pursuit, min Σ w_j|x_j| s.t. ‖A x − y‖ ≤ ε, by Chambolle–Pock (primalDual.ts) with an
 * exact finish for ε = 0.
 *
 * The finish ("polish"): once the support S of the iterate has stopped moving and |S| ≤ m, take
 * x_S as the least-squares solution of A_S x_S = y, and correct the dual iterate ν by the smallest
 * step that satisfies the optimality condition on S, A_Sᴴν' = −w_S ∘ sign(x_S). Then
 * −Re⟨ν', y⟩ = Σ w|x| exactly, and ν' scaled into the dual set certifies the pair:
 * relative gap = 1 − 1/max(1, max_j |(Aᴴν')_j|/w_j). When the support is right this gives the
 * exact minimiser (an LP vertex in the real case) to rounding error instead of the first-order
 * method's slow tail; when it is wrong the certificate fails and the iterations continue.
 */

export interface BasisPursuitOptions {
  epsilon: number;
  weights: Float64Array | null;
  maxIterations: number;
  tolerance: number;
}

export interface BasisPursuitOutcome extends PrimalDualState {
  polished: boolean;
  converged: boolean;
}

/** Least-squares fits on the support must leave at most this relative residual to count as exact. */
const POLISH_FEASIBILITY = 1e-10;
/** Relative size below which an entry of the first-order iterate is taken for its tail. */
const CANDIDATE_THRESHOLD = 1e-6;
/** Relative size below which a least-squares coefficient is taken for zero. */
const PRUNE_THRESHOLD = 1e-9;
/** Scale of the starting primal weight (see primalWeight). */
const INITIAL_WEIGHT_SCALE = 0.3;
/** Relative stationarity of the least-squares fit on the candidate support. */
const POLISH_FIT_TOLERANCE = 1e-13;
/** Relative residual of A_Sᴴν' = b when correcting the dual (gaps are judged at 1e-6 and up). */
const CERTIFICATE_CG_TOLERANCE = 1e-11;

/**
 * Solves from the given x and ν (both in place; ν has the length of y). Zero ν is a fine start;
 * the previous frame's ν is a better one.
 */
export function basisPursuit(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  nu: Float64Array,
  opts: BasisPursuitOptions,
  ws: Workspace,
): BasisPursuitOutcome {
  const yNorm = Math.sqrt(normSquared(y));
  if (yNorm <= opts.epsilon) {
    // x = 0 is feasible and has objective 0: optimal.
    x.fill(0);
    nu.fill(0);
    return { iterations: 0, relGap: 0, infeasibility: 0, dualInfeasibility: 0, polished: false, converged: true };
  }
  const weight = primalWeight(A, y, opts.weights, ws);
  let polished = false;
  const memory: PolishMemory = { count: 0, feasible: false, infeasibility: Infinity, fitCount: 0 };
  const hook =
    opts.epsilon === 0
      ? (state: PrimalDualState): boolean => {
          if (!polish(A, y, x, nu, opts, ws, state, memory)) return false;
          polished = true;
          return true;
        }
      : null;
  const state = primalDual(A, y, x, nu, opts, weight, ws, hook);
  if (!polished && opts.epsilon === 0 && state.relGap <= opts.tolerance) {
    // Converged on its own: the polish still removes the first-order method's residual error.
    polished = polish(A, y, x, nu, opts, ws, state, memory);
  }
  const converged = state.relGap <= opts.tolerance && state.infeasibility <= opts.tolerance;
  return { ...state, polished, converged };
}

/**
 * The starting primal weight ω (τ = ω/‖A‖, σ = 1/(ω‖A‖)), which should be near ‖x*‖/‖ν*‖:
 * ‖A‖‖y‖/(‖Aᴴy‖∞,w √(n/m)) scaled by a constant tuned on Gaussian problems, real and complex,
 * in and out of the recovery region. The updates in primalDual.ts correct it from there.
 */
function primalWeight(A: LinearOperator, y: Float64Array, weights: Float64Array | null, ws: Workspace): number {
  const aty = ws.colVector('bp.aty');
  A.adjoint(y, aty);
  const peak = weightedMaxModulus(aty, weights);
  const yNormSq = normSquared(y);
  if (!(peak > 0)) return 1;
  return (INITIAL_WEIGHT_SCALE * A.normBound * Math.sqrt(yNormSq)) / (peak * Math.sqrt(A.cols / A.rows));
}

/** What the last polish attempt learnt, so a retry on an unchanged support skips the fit. */
interface PolishMemory {
  /** Size of the candidate support last fitted (0: none yet); its indices are in 'bp.lastSupport'. */
  count: number;
  /** Whether that fit reproduced y. */
  feasible: boolean;
  infeasibility: number;
  /** Size of the fit's support after pruning; indices in 'bp.fitSupport', the fit in 'bp.polishX'. */
  fitCount: number;
}

/** Tries the exact finish described above; on success writes the pair into x and ν. */
function polish(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  nu: Float64Array,
  opts: BasisPursuitOptions,
  ws: Workspace,
  state: PrimalDualState,
  memory: PolishMemory,
): boolean {
  const candidate = ws.colIndices('bp.candidate');
  // Candidate support: the iterate's nonzeros, or, when the first-order tail still holds many
  // tiny entries, those above 1e-6 of the peak. More than m columns cannot be a vertex.
  let count = detectSupport(x, 0, candidate);
  if (count > A.rows) count = detectSupport(x, CANDIDATE_THRESHOLD, candidate);
  if (count === 0 || count > A.rows) return false;
  const last = ws.colIndices('bp.lastSupport');
  const support = ws.colIndices('bp.fitSupport');
  const xp = ws.colVector('bp.polishX');
  if (!sameIndices(candidate, last, count, memory.count)) {
    memory.count = count;
    last.set(candidate.subarray(0, count));
    xp.set(x);
    refitOnSupport(A, y, candidate, count, xp, 4 * count + 50, POLISH_FIT_TOLERANCE, ws);
    const axp = ws.rowVector('bp.polishAx');
    A.apply(xp, axp);
    let resSq = 0;
    for (let i = 0; i < axp.length; i++) resSq += (axp[i]! - y[i]!) ** 2;
    memory.infeasibility = Math.sqrt(resSq / normSquared(y));
    memory.feasible = memory.infeasibility <= POLISH_FEASIBILITY;
    // Columns the fit leaves at rounding level are not in the minimiser's support: drop them, or
    // the optimality condition below would pin Aᴴν on them to an arbitrary phase.
    memory.fitCount = detectSupport(xp, PRUNE_THRESHOLD, support);
    keepOnly(xp, support, memory.fitCount);
  }
  if (!memory.feasible) return false;
  count = memory.fitCount;

  // Dual candidates: the iterate ν corrected onto the optimality condition on S, else the
  // minimum-norm solution of that condition (the correction of ν = 0, Fuchs's certificate,
  // IEEE Trans. Inf. Theory 50(6), 2004), which helps while ν is still far off.
  let primal = 0;
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    const w = opts.weights === null ? 1 : opts.weights[j]!;
    primal += w * Math.hypot(xp[2 * j]!, xp[2 * j + 1]!);
  }
  const candidateNu = ws.rowVector('bp.polishNu');
  candidateNu.set(nu);
  let relGap = certifyOnSupport(A, y, xp, support, count, candidateNu, opts.weights, primal, ws);
  if (!(relGap <= opts.tolerance)) {
    candidateNu.fill(0);
    relGap = certifyOnSupport(A, y, xp, support, count, candidateNu, opts.weights, primal, ws);
    if (!(relGap <= opts.tolerance)) return false;
  }
  x.set(xp);
  nu.set(candidateNu);
  state.relGap = relGap;
  state.infeasibility = memory.infeasibility;
  state.dualInfeasibility = 0;
  return true;
}

function sameIndices(a: Int32Array, b: Int32Array, na: number, nb: number): boolean {
  if (na !== nb) return false;
  for (let i = 0; i < na; i++) if (a[i] !== b[i]) return false;
  return true;
}

/**
 * Moves ν (in place) by the least change that satisfies A_Sᴴν = −w_S ∘ sign(x_S), scales it into
 * the dual set and returns the relative gap it certifies for x (objective `primal`).
 * That change is A_S c with A_SᴴA_S c = b − A_Sᴴν.
 */
function certifyOnSupport(
  A: LinearOperator,
  y: Float64Array,
  x: Float64Array,
  support: Int32Array,
  count: number,
  nu: Float64Array,
  weights: Float64Array | null,
  primal: number,
  ws: Workspace,
): number {
  const g = ws.colVector('bp.certG');
  const rhs = ws.colVector('bp.certRhs');
  const c = ws.colVector('bp.certC');
  const cFull = ws.colVector('bp.certCFull');
  const step = ws.rowVector('bp.certStep');
  A.adjoint(nu, g);
  gatherOnSupport(g, support, count, rhs);
  let rhsScale = 0;
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    const re = x[2 * j]!;
    const im = x[2 * j + 1]!;
    const mod = Math.sqrt(re * re + im * im);
    const w = weights === null ? 1 : weights[j]!;
    rhs[2 * k] = (-w * re) / mod - rhs[2 * k]!;
    rhs[2 * k + 1] = (-w * im) / mod - rhs[2 * k + 1]!;
    rhsScale += w * w;
  }
  restrictedNormalCg(A, support, count, rhs, c, 4 * count + 50, CERTIFICATE_CG_TOLERANCE * Math.sqrt(rhsScale), ws);
  cFull.fill(0);
  for (let k = 0; k < count; k++) {
    cFull[2 * support[k]!] = c[2 * k]!;
    cFull[2 * support[k]! + 1] = c[2 * k + 1]!;
  }
  A.apply(cFull, step);
  for (let i = 0; i < nu.length; i++) nu[i] = nu[i]! + step[i]!;
  A.adjoint(nu, g);
  const dualPeak = weightedMaxModulus(g, weights);
  if (dualPeak > 1) for (let i = 0; i < nu.length; i++) nu[i] = nu[i]! / dualPeak;
  let nuDotY = 0;
  for (let i = 0; i < y.length; i++) nuDotY += nu[i]! * y[i]!;
  return Math.abs(primal + nuDotY) / primal;
}

/** ε for a frame: the settings' own, else from the noise level, else 0 (equality). */
export function epsilonFor(
  s: { epsilon?: number | undefined; epsilonFactor: number; noiseSigma?: number | undefined },
  m: number,
  sigma: number | undefined,
): number {
  if (s.epsilon !== undefined) return s.epsilon;
  const noise = sigma ?? s.noiseSigma;
  return noise === undefined ? 0 : epsilonFromNoise(noise, m, s.epsilonFactor);
}

/** The dual start: the warm state's dual when it fits this operator, else zero. */
export function dualStart(warm: WarmState | undefined, ws: Workspace): Float64Array {
  const nu = ws.rowVector('bp.nu');
  if (warm?.dual !== undefined && warm.dual.length === nu.length && allFinite(warm.dual)) nu.set(warm.dual);
  else nu.fill(0);
  return nu;
}

/**
 * A basis-pursuit solve as solve() reports it: the certificate (of the named kind) is the larger
 * of the gap and the infeasibility, the warm state keeps a copy of the dual ν.
 */
export function basisPursuitMethodOutcome(
  out: BasisPursuitOutcome,
  certificateKind: string,
  iterations: number,
  epsilon: number,
  nu: Float64Array,
): MethodOutcome {
  return {
    iterations,
    certificate: { kind: certificateKind, value: Math.max(out.relGap, out.infeasibility) },
    converged: out.converged,
    fitted: out.polished,
    evidence: {
      epsilon,
      duality_gap: out.relGap,
      primal_residual: out.infeasibility,
      dual_residual: out.dualInfeasibility,
      polished: out.polished ? 1 : 0,
    },
    warm: { dual: nu.slice() },
  };
}

export function basisPursuitMethod(
  A: LinearOperator,
  y: Float64Array,
  s: BasisPursuitSettings,
  warm: WarmState | undefined,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  const epsilon = epsilonFor(s, A.rows, sigma);
  const nu = dualStart(warm, ws);
  const out = basisPursuit(
    A,
    y,
    x,
    nu,
    { epsilon, weights: null, maxIterations: s.maxIterations, tolerance: s.tolerance },
    ws,
  );
  return basisPursuitMethodOutcome(out, 'duality_gap', out.iterations, epsilon, nu);
}
