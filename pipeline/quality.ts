import type { SolveOutput } from './types.js';

/**
 * Quality flags attached to every published result: plain words a user can act on.
 *
 * - `cold_start`: solved without a warm start (first frame of the stream, or its worker was
 *   replaced); expect more iterations than usual.
 * - `sequence_gap`: sequence numbers are missing right before this frame.
 * - `frames_dropped_before`: frames of this stream were dropped (queue policy or a failed solve)
 *   since the previous result.
 * - `residual_high`: the fit leaves more unexplained than the noise accounts for.
 * - `not_converged`: the solver stopped before its stopping test was met.
 * - `iteration_cap`: the solver used every iteration it was allowed.
 * - `support_churn`: the set of nonzero coefficients changed a lot against the previous frame.
 * - `recovery_marginal` / `recovery_unlikely`: with this many measurements, a signal with as many
 *   nonzeros as found sits near / beyond the limit of reliable recovery for this operator family.
 */
export type QualityFlag =
  | 'cold_start'
  | 'sequence_gap'
  | 'frames_dropped_before'
  | 'residual_high'
  | 'not_converged'
  | 'iteration_cap'
  | 'support_churn'
  | 'recovery_marginal'
  | 'recovery_unlikely';

/**
 * With a known noise level σ (standard deviation of each complex measurement, E|nᵢ|² = σ²),
 * the noise norm is about σ·√m; a fit whose residual exceeds this many times that is flagged.
 */
export const RESIDUAL_NOISE_FACTOR = 2;
/** Without a noise level: flagged when more than this fraction of ‖y‖ is left unexplained. */
export const RELATIVE_RESIDUAL_LIMIT = 0.1;
/** Support churn flagged above this fraction of the support size... */
export const CHURN_FRACTION_LIMIT = 0.5;
/** ...and only when at least this many coefficients moved (a tiny support churns by nature). */
export const CHURN_MIN_CHANGES = 2;

export interface QualityContext {
  /** Measurements per frame. */
  rows: number;
  /** Noise level for this frame (the frame's own, else the declared one), if known. */
  sigma: number | undefined;
  /** Sequence numbers missing right before this frame. */
  gap: number;
  /** Frames dropped since the previous published result. */
  droppedBefore: number;
}

export function assessQuality(out: SolveOutput, ctx: QualityContext): QualityFlag[] {
  const flags: QualityFlag[] = [];
  const ev = out.evidence;
  if (out.coldStart) flags.push('cold_start');
  if (ctx.gap > 0) flags.push('sequence_gap');
  if (ctx.droppedBefore > 0) flags.push('frames_dropped_before');
  if (residualHigh(ev.residual, ev.relative_residual, ctx)) flags.push('residual_high');
  if (!ev.converged) flags.push('not_converged');
  if (out.hitIterationCap) flags.push('iteration_cap');
  const changes = ev.added + ev.removed;
  if (!out.coldStart && changes >= CHURN_MIN_CHANGES && changes > CHURN_FRACTION_LIMIT * Math.max(1, ev.support_size)) {
    flags.push('support_churn');
  }
  if (ev.recoverability === 'marginal') flags.push('recovery_marginal');
  if (ev.recoverability === 'unlikely') flags.push('recovery_unlikely');
  return flags;
}

function residualHigh(residual: number, relative: number, ctx: QualityContext): boolean {
  if (!Number.isFinite(residual) || !Number.isFinite(relative)) return true;
  if (ctx.sigma !== undefined && ctx.sigma > 0) {
    return residual > RESIDUAL_NOISE_FACTOR * ctx.sigma * Math.sqrt(ctx.rows);
  }
  return relative > RELATIVE_RESIDUAL_LIMIT;
}
