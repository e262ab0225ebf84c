import type { LinearOperator } from '../operators/types.js';
import { basisPursuit, basisPursuitMethodOutcome, dualStart, epsilonFor, type BasisPursuitOutcome } from './basisPursuit.js';
import type { MethodOutcome } from './outcome.js';
import type { ReweightedL1Settings } from './settings.js';
import { selectLargest, squaredModuli } from './support.js';
import type { WarmState } from './types.js';
import type { Workspace } from './workspace.js';

/**
 * Iteratively reweighted l1 minimisation (Candès, Wakin & Boyd, "Enhancing sparsity by
 * reweighted ℓ1 minimization", J. Fourier Anal. Appl. 14(5–6), 2008): solve basis pursuit, then
 * repeatedly solve the weighted problem min Σ w_j|x_j| s.t. ‖A x − y‖ ≤ ε with
 * w_j = 1/(|x_j| + η), η from the previous solution. Large entries become cheap, small ones
 * expensive, which approaches l0 and recovers sparser-than-l1 signals beyond the l1 phase
 * transition.
 *
 * η follows the paper's adaptive rule: the i₀-th largest |x_j| with i₀ = ⌊m / (4 ln(n/m))⌋,
 * floored at 10⁻³·max|x| (the paper floors at an absolute 10⁻³; ours is relative, so the method
 * does not depend on the signal's scale). Weights are normalised to η/(|x_j| + η) ∈ (0, 1],
 * which leaves the minimiser unchanged. A warm start takes its first weights from the previous
 * frame's estimate and skips the unweighted solve. Stops early when a weighted solve leaves the
 * estimate unchanged (to 10⁻⁹ relative).
 */

const SCALE_FLOOR = 1e-3;
const SETTLED = 1e-9;

export function reweightedL1Method(
  A: LinearOperator,
  y: Float64Array,
  s: ReweightedL1Settings,
  warm: WarmState | undefined,
  sigma: number | undefined,
  ws: Workspace,
  x: Float64Array,
): MethodOutcome {
  const epsilon = epsilonFor(s, A.rows, sigma);
  const nu = dualStart(warm, ws);
  const weights = ws.colReals('rw.weights');
  const previous = ws.colVector('rw.previous');
  const opts = { epsilon, weights: null as Float64Array | null, maxIterations: s.maxIterations, tolerance: s.tolerance };
  let iterations = 0;
  let solves = 0;
  let out: BasisPursuitOutcome | undefined;
  if (warm?.x === undefined) {
    out = basisPursuit(A, y, x, nu, opts, ws);
    iterations += out.iterations;
    solves++;
  }
  opts.weights = weights;
  for (let round = 0; round < s.reweightings; round++) {
    if (!setWeights(x, A.rows, weights, ws)) break; // x = 0: nothing to reweight
    previous.set(x);
    out = basisPursuit(A, y, x, nu, opts, ws);
    iterations += out.iterations;
    solves++;
    if (settled(previous, x)) break;
  }
  if (out === undefined) {
    // Zero reweightings on a warm start still owe the frame one (unweighted) solve.
    opts.weights = null;
    out = basisPursuit(A, y, x, nu, opts, ws);
    iterations += out.iterations;
    solves++;
  }
  const outcome = basisPursuitMethodOutcome(out, 'weighted_duality_gap', iterations, epsilon, nu);
  outcome.evidence['weighted_solves'] = solves;
  return outcome;
}

/** Fills w_j = η/(|x_j| + η) by the adaptive rule above; false when x = 0. */
function setWeights(x: Float64Array, m: number, weights: Float64Array, ws: Workspace): boolean {
  const n = weights.length;
  const mag = ws.colReals('rw.magnitudes');
  squaredModuli(x, mag);
  let peakSq = 0;
  for (let j = 0; j < n; j++) if (mag[j]! > peakSq) peakSq = mag[j]!;
  if (peakSq === 0) return false;
  const rank = Math.max(1, Math.floor(m / (4 * Math.log(Math.max(n / m, Math.E)))));
  const idx = ws.colIndices('rw.rank');
  selectLargest(mag, n, Math.min(rank, n), idx);
  let rankedSq = Infinity;
  for (let k = 0; k < Math.min(rank, n); k++) rankedSq = Math.min(rankedSq, mag[idx[k]!]!);
  const eta = Math.max(Math.sqrt(rankedSq), SCALE_FLOOR * Math.sqrt(peakSq));
  for (let j = 0; j < n; j++) weights[j] = eta / (Math.sqrt(mag[j]!) + eta);
  return true;
}

/** True when x moved by at most SETTLED relative to its size. */
function settled(previous: Float64Array, x: Float64Array): boolean {
  let diff = 0;
  let size = 0;
  for (let i = 0; i < x.length; i++) {
    diff += (x[i]! - previous[i]!) ** 2;
    size += x[i]! * x[i]!;
  }
  return diff <= SETTLED * SETTLED * size;
}
