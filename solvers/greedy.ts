import type { LinearOperator } from '../operators/types.js';
import { normSquared } from './complex.js';
import { epsilonFromNoise } from './noise.js';
import type { MethodOutcome } from './outcome.js';
import { REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, refitOnSupport } from './refit.js';
import type { CosampSettings, IhtSettings, OmpSettings } from './settings.js';
import { selectLargest, squaredModuli, unionSorted } from './support.js';
import type { Workspace } from './workspace.js';

/**
 * Greedy methods for a known or bounded sparsity K. Their certificate is the residual: they
 * report converged when ‖A x − y‖ ≤ max(tolerance·‖y‖, ε(σ)), with ε(σ) the noise bound of
 * noise.ts when a noise level is known (a noisy frame cannot fit better than its noise).
 */

interface GreedyContext {
  yNorm: number;
  /** Residual norm at which the fit counts as done. */
  stop: number;
}

function context(A: LinearOperator, y: Float64Array, s: OmpSettings | CosampSettings | IhtSettings, sigma: number | undefined): GreedyContext {
  const yNorm = Math.sqrt(normSquared(y));
  const noise = sigma ?? s.noiseSigma;
  const noiseBound = noise === undefined ? 0 : epsilonFromNoise(noise, A.rows, 1);
  return { yNorm, stop: Math.max(s.tolerance * yNorm, noiseBound) };
}

function outcome(
  iterations: number,
  residualNorm: number,
  ctx: GreedyContext,
  fitted: boolean,
  evidence: Record<string, number>,
): MethodOutcome {
  const rel = ctx.yNorm > 0 ? residualNorm / ctx.yNorm : 0;
  return {
    iterations,
    certificate: { kind: 'relative_residual', value: rel },
    converged: residualNorm <= ctx.stop,
    fitted,
    evidence: { ...evidence, stop_residual: ctx.yNorm > 0 ? ctx.stop / ctx.yNorm : 0 },
    warm: {},
  };
}

/** r ← y − A x; returns ‖r‖. */
function residual(A: LinearOperator, y: Float64Array, x: Float64Array, ax: Float64Array, r: Float64Array): number {
  A.apply(x, ax);
  let s = 0;
  for (let i = 0; i < r.length; i++) {
    r[i] = y[i]! - ax[i]!;
    s += r[i]! * r[i]!;
  }
  return Math.sqrt(s);
}

/**
 * Keeps the k largest entries of u, writing them into out (zeros elsewhere) and their indices,
 * ascending, into idx[0..k). u and out may be the same array.
 */
function hardThreshold(u: Float64Array, k: number, out: Float64Array, idx: Int32Array, ws: Workspace): number {
  const n = u.length >> 1;
  const mag = ws.colReals('greedy.magnitudes');
  squaredModuli(u, mag);
  let nonzero = 0;
  for (let j = 0; j < n; j++) if (mag[j]! > 0) nonzero++;
  const keep = Math.min(k, nonzero);
  selectLargest(mag, n, keep, idx);
  let next = 0;
  for (let j = 0; j < n; j++) {
    if (next < keep && idx[next] === j) {
      next++;
      out[2 * j] = u[2 * j]!;
      out[2 * j + 1] = u[2 * j + 1]!;
    } else {
      out[2 * j] = 0;
      out[2 * j + 1] = 0;
    }
  }
  return keep;
}

/**
 * Orthogonal matching pursuit (Pati, Rezaiifar & Krishnaprasad, Asilomar 1993; analysed by Tropp &
 * Gilbert, IEEE Trans. Inf. Theory 53(12), 2007): add the column most correlated with the
 * residual, refit least squares on the support, repeat until K columns or the stop residual.
 * OMP always starts cold: a seeded support could only lock stale columns in (CoSaMP and IHT
 * are the warm-startable greedy methods).
 */
export function ompMethod(
  A: LinearOperator,
  y: Float64Array,
  s: OmpSettings,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  const ctx = context(A, y, s, sigma);
  const support = ws.colIndices('omp.support');
  const inSupport = ws.colIndices('omp.member');
  const r = ws.rowVector('omp.r');
  const ax = ws.rowVector('omp.ax');
  const corr = ws.colVector('omp.corr');
  inSupport.fill(0);
  x.fill(0);
  r.set(y);
  let resNorm = ctx.yNorm;
  let count = 0;
  const limit = Math.min(s.sparsity, A.rows);
  while (count < limit && resNorm > ctx.stop) {
    A.adjoint(r, corr);
    let best = -1;
    let bestQ = 0;
    for (let j = 0; j < A.cols; j++) {
      if (inSupport[j] === 1) continue;
      const q = corr[2 * j]! * corr[2 * j]! + corr[2 * j + 1]! * corr[2 * j + 1]!;
      if (q > bestQ) {
        bestQ = q;
        best = j;
      }
    }
    if (best < 0) break; // the residual is orthogonal to every remaining column
    let pos = count++;
    while (pos > 0 && support[pos - 1]! > best) {
      support[pos] = support[pos - 1]!;
      pos--;
    }
    support[pos] = best;
    inSupport[best] = 1;
    refitOnSupport(A, y, support, count, x, REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, ws);
    resNorm = residual(A, y, x, ax, r);
  }
  return outcome(count, resNorm, ctx, true, { selected: count });
}

/**
 * CoSaMP (Needell & Tropp, Appl. Comput. Harmon. Anal. 26(3), 2009): merge the 2K columns most
 * correlated with the residual into the current support, fit least squares on the union, keep
 * the K largest. A warm x (pruned to K) replaces the zero start. Ends with a least-squares fit
 * on the final support; stops when the residual meets the stop level or stops decreasing.
 */
export function cosampMethod(
  A: LinearOperator,
  y: Float64Array,
  s: CosampSettings,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  const ctx = context(A, y, s, sigma);
  const k = Math.min(s.sparsity, A.rows);
  const current = ws.colIndices('cosamp.current');
  const proxyIdx = ws.colIndices('cosamp.proxy');
  const merged = ws.colIndices('cosamp.merged');
  const r = ws.rowVector('cosamp.r');
  const ax = ws.rowVector('cosamp.ax');
  const proxy = ws.colVector('cosamp.proxyVector');
  let count = hardThreshold(x, k, x, current, ws);
  let resNorm = residual(A, y, x, ax, r);
  let iterations = 0;
  while (iterations < s.maxIterations && resNorm > ctx.stop) {
    A.adjoint(r, proxy);
    // At most m columns in the union, so its least-squares fit stays determined.
    const picked = hardThreshold(proxy, Math.min(2 * k, A.rows - count), proxy, proxyIdx, ws);
    const union = unionSorted(current, count, proxyIdx, picked, merged);
    refitOnSupport(A, y, merged, union, x, REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, ws);
    count = hardThreshold(x, k, x, current, ws);
    const before = resNorm;
    resNorm = residual(A, y, x, ax, r);
    iterations++;
    if (resNorm >= before * (1 - 1e-12)) break; // no progress: the support has settled
  }
  if (count > 0) {
    refitOnSupport(A, y, current, count, x, REFIT_MAX_ITERATIONS, REFIT_TOLERANCE, ws);
    resNorm = residual(A, y, x, ax, r);
  }
  return outcome(iterations, resNorm, ctx, true, {});
}

/** Line-search constants of normalised IHT: c and κ > 1/(1 − c), as in the paper. */
const IHT_C = 0.01;
const IHT_KAPPA = 2;
const IHT_MAX_SHRINKS = 30;
/** A x is maintained by linear updates and recomputed exactly this often. */
const IHT_RESYNC = 50;

/**
 * Normalised iterative hard thresholding (Blumensath & Davies, IEEE J. Sel. Topics Signal
 * Process. 4(2), 2010): x ← H_K(x + μ Aᴴ(y − A x)) with the step μ = ‖g_Γ‖²/‖A g_Γ‖² exact on the
 * current support Γ, shrunk when the support changes until μ ≤ (1 − c)‖Δx‖²/‖A Δx‖².
 * A warm x (pruned to K) replaces the zero start.
 */
export function ihtMethod(
  A: LinearOperator,
  y: Float64Array,
  s: IhtSettings,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  const ctx = context(A, y, s, sigma);
  const k = Math.min(s.sparsity, A.rows);
  const support = ws.colIndices('iht.support');
  const nextSupport = ws.colIndices('iht.nextSupport');
  const g = ws.colVector('iht.g');
  const gOnSupport = ws.colVector('iht.gOnSupport');
  const candidate = ws.colVector('iht.candidate');
  const step = ws.colVector('iht.step');
  const ax = ws.rowVector('iht.ax');
  const ag = ws.rowVector('iht.ag');
  const astep = ws.rowVector('iht.astep');
  const r = ws.rowVector('iht.r');

  let count = hardThreshold(x, k, x, support, ws);
  let resNorm = residual(A, y, x, ax, r);
  A.adjoint(r, g);
  if (count === 0) count = hardThreshold(g, k, gOnSupport, support, ws); // initial support: top K of Aᴴy
  let iterations = 0;
  while (iterations < s.maxIterations && resNorm > ctx.stop) {
    // Exact step on the current support.
    gOnSupport.fill(0);
    let gSq = 0;
    for (let c = 0; c < count; c++) {
      const j = support[c]!;
      gOnSupport[2 * j] = g[2 * j]!;
      gOnSupport[2 * j + 1] = g[2 * j + 1]!;
      gSq += g[2 * j]! ** 2 + g[2 * j + 1]! ** 2;
    }
    if (gSq === 0) break; // stationary on its support
    A.apply(gOnSupport, ag);
    const curvature = normSquared(ag);
    if (!(curvature > 0)) break; // the gradient lies in the null space of A_Γ
    let mu = gSq / curvature;
    let nextCount = 0;
    let accepted = false;
    for (let shrink = 0; shrink <= IHT_MAX_SHRINKS && !accepted; shrink++) {
      for (let i = 0; i < x.length; i++) candidate[i] = x[i]! + mu * g[i]!;
      nextCount = hardThreshold(candidate, k, candidate, nextSupport, ws);
      if (sameSupport(support, count, nextSupport, nextCount)) {
        for (let i = 0; i < ax.length; i++) ax[i] = ax[i]! + mu * ag[i]!;
        accepted = true;
      } else {
        for (let i = 0; i < x.length; i++) step[i] = candidate[i]! - x[i]!;
        A.apply(step, astep);
        const omega = ((1 - IHT_C) * normSquared(step)) / normSquared(astep);
        if (mu <= omega) {
          for (let i = 0; i < ax.length; i++) ax[i] = ax[i]! + astep[i]!;
          accepted = true;
        } else mu /= IHT_KAPPA * (1 - IHT_C);
      }
    }
    if (!accepted) break;
    x.set(candidate);
    for (let c = 0; c < nextCount; c++) support[c] = nextSupport[c]!;
    count = nextCount;
    iterations++;
    if (iterations % IHT_RESYNC === 0) A.apply(x, ax);
    let sq = 0;
    for (let i = 0; i < r.length; i++) {
      r[i] = y[i]! - ax[i]!;
      sq += r[i]! * r[i]!;
    }
    const before = resNorm;
    resNorm = Math.sqrt(sq);
    if (resNorm >= before * (1 - 1e-12)) break; // stalled
    A.adjoint(r, g);
  }
  resNorm = residual(A, y, x, ax, r);
  return outcome(iterations, resNorm, ctx, false, {});
}

function sameSupport(a: Int32Array, na: number, b: Int32Array, nb: number): boolean {
  if (na !== nb) return false;
  for (let i = 0; i < na; i++) if (a[i] !== b[i]) return false;
  return true;
}
