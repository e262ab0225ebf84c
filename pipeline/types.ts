/**
 * Shapes that flow through a stream's pipeline: validate → order → bounded queue → solve →
 * assess quality → alert rules → fan-out. The wire names (snake_case) are kept for everything a
 * producer declares, because declarations are persisted and echoed to subscribers as sent.
 */

export type QueuePolicy = 'refuse_new' | 'drop_oldest' | 'keep_latest';

export interface QueueSettings {
  /** Frames waiting to be solved (the frame being solved does not count). */
  capacity: number;
  policy: QueuePolicy;
}

export type AlertMetric = 'relative_residual' | 'certificate' | 'iterations' | 'support_churn' | 'input_gap';

export interface AlertRule {
  metric: AlertMetric;
  /** A frame counts against the rule when its value is strictly above this limit. */
  above: number;
  /** A frame counts towards clearing when its value is strictly below this level (< above). */
  clear_below: number;
  /** How many of the last `of` frames must count to raise (or to clear). */
  k: number;
  of: number;
}

/** A stream as its producer declared it, after validation. */
export interface StreamDeclaration {
  name: string;
  /** The operator description, as sent (validated by operators/). */
  operator: object;
  /** The solver settings, as sent (validated by solvers/). */
  solver: object;
  alerts: AlertRule[];
  queue: QueueSettings;
  /** Noise level of the measurements when frames do not carry their own. */
  noise_sigma?: number;
  note?: string;
}

/** What the worker reports once it has built a stream's operator. */
export interface StreamShape {
  /** Measurements per frame (complex entries of y). */
  rows: number;
  /** Unknowns (complex coefficients). */
  cols: number;
  /** Operator family name, as used by the recoverability table. */
  family: string;
}

/** A frame as it enters the pipeline: y already copied out of the socket buffer. */
export interface IncomingFrame {
  stream: string;
  seq: number;
  /** Producer's timestamp, ms since the epoch. */
  time: number;
  /** Interleaved complex measurements, length 2·rows. */
  y: Float64Array;
  sigma?: number;
  /** performance.now() when the daemon received it (for end-to-end latency). */
  receivedAt: number;
}

/** Why a frame was refused before it entered the queue (the producer is told). */
export type RefusalReason =
  | 'unknown_stream'
  | 'forbidden'
  | 'wrong_length'
  | 'not_finite'
  | 'bad_sigma'
  | 'duplicate'
  | 'out_of_order'
  | 'queue_full'
  | 'stream_closing'
  | 'shutting_down';

/**
 * Why an accepted frame was dropped without a result (subscribers get a `missed` notice with
 * this reason): displaced by the queue policy (drop_oldest, keep_latest), its solve failed (the
 * solver threw, or two workers died on it), or the daemon stopped before it could be solved.
 */
export type DropReason = 'dropped_by_queue' | 'solver_failed' | 'shutdown';

export type RecoverabilityVerdict = 'safe' | 'marginal' | 'unlikely';

/** The evidence a solve leaves behind, in wire names. */
export interface Evidence {
  relative_residual: number;
  residual: number;
  iterations: number;
  certificate_kind: string;
  certificate: number;
  converged: boolean;
  support_size: number;
  added: number;
  removed: number;
  recoverability: RecoverabilityVerdict;
  solve_ms: number;
}

/** What the solve stage returns for one frame. */
export interface SolveOutput {
  evidence: Evidence;
  /** True when the solver had no warm state (first frame, or the stream's worker was replaced). */
  coldStart: boolean;
  /** True when the solver stopped at its iteration limit. */
  hitIterationCap: boolean;
  /** Support of the estimate, ascending. */
  indices: Uint32Array;
  /** Coefficient values on the support, interleaved complex (length 2·indices.length). */
  values: Float64Array;
  /** Reconstructed signal (basis synthesis of the estimate), when asked for. */
  signal?: Float64Array;
  /** The frame's measurements, handed back unchanged (they were transferred to the solver). */
  y: Float64Array;
}

/** A solved frame with its quality flags, ready for fan-out. */
export interface PublishedResult {
  stream: string;
  seq: number;
  time: number;
  /** ms since the epoch when the result was published. */
  solvedAt: number;
  flags: string[];
  evidence: Evidence;
  indices: Uint32Array;
  values: Float64Array;
  signal?: Float64Array;
  /** The frame's measurements as received. */
  y: Float64Array;
  /** The frame's own noise level, when it carried one. */
  sigma?: number;
  /** Seconds from receipt to publication. */
  latencySeconds: number;
}

export interface AlertEvent {
  stream: string;
  seq: number;
  /** Position of the rule in the declaration's `alerts` list. */
  ruleIndex: number;
  rule: AlertRule;
  state: 'raised' | 'cleared';
  value: number;
  /** `above` when raised, `clear_below` when cleared. */
  limit: number;
}

/** A contiguous run of results subscribers will not get, announced before the next result. */
export interface MissedRange {
  stream: string;
  fromSeq: number;
  toSeq: number;
  count: number;
  reason: DropReason;
}

export type PipelineEvent =
  | { kind: 'result'; result: PublishedResult }
  | { kind: 'alert'; alert: AlertEvent }
  | { kind: 'missed'; missed: MissedRange }
  /** One accepted frame left the pipeline without a result (immediately, for counters and acks). */
  | { kind: 'dropped'; stream: string; seq: number; reason: DropReason }
  | { kind: 'stream_closed'; stream: string };

/** One frame handed to the solve stage. `y` is owned by the task (it may be transferred). */
export interface SolveTask {
  stream: string;
  seq: number;
  y: Float64Array;
  /** Noise level for this frame (the frame's own, else the declared one). */
  sigma?: number;
  /** Whether some subscriber wants the reconstructed signal. */
  wantSignal: boolean;
}

/** Where frames are solved: the worker pool in the daemon, or in-process in benchmarks. */
export interface SolveBackend {
  solve(task: SolveTask): Promise<SolveOutput>;
}
