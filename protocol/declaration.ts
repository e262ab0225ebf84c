import { z } from 'zod';
import {
  MAX_ALERT_RULES,
  MAX_ALERT_WINDOW,
  MAX_QUEUE_CAPACITY,
  MAX_TEXT_LENGTH,
} from './limits.js';
import { streamNameProblem, streamPatternProblem } from './names.js';

/**
 * The declaration envelope: what the protocol layer checks about a stream declaration. The
 * `operator` and `solver` objects are carried opaquely; the daemon validates them with the
 * operator and solver parsers and reports their errors under `stream.operator.` / `stream.solver.`.
 */

export const streamNameSchema = z.string().superRefine((s, ctx) => {
  const problem = streamNameProblem(s);
  if (problem) ctx.addIssue({ code: 'custom', message: problem });
});

export const streamPatternSchema = z.string().superRefine((s, ctx) => {
  const problem = streamPatternProblem(s);
  if (problem) ctx.addIssue({ code: 'custom', message: problem });
});

/** A MessagePack map decoded to a plain object (not an array, not bytes, not null). */
export function isPlainMap(v: unknown): v is Record<string, unknown> {
  if (typeof v !== 'object' || v === null || Array.isArray(v) || ArrayBuffer.isView(v)) return false;
  const proto = Object.getPrototypeOf(v);
  return proto === Object.prototype || proto === null;
}

/** An object the protocol carries without looking inside. */
export const opaqueMapSchema = z.custom<object>(isPlainMap, { message: 'expected a map' });

export const finiteNumber = z.number();
export const nonNegativeNumber = z.number().min(0);
export const text = z.string().max(MAX_TEXT_LENGTH);

export const ALERT_METRICS = ['relative_residual', 'certificate', 'iterations', 'support_churn', 'input_gap'] as const;
export type AlertMetric = (typeof ALERT_METRICS)[number];

export const alertRuleSchema = z
  .strictObject({
    metric: z.enum(ALERT_METRICS),
    /** Raised when at least `k` of the last `of` frames have the metric above this. */
    above: finiteNumber,
    /** Cleared when at least `k` of the last `of` frames have the metric below this (< above: hysteresis). */
    clear_below: finiteNumber,
    k: z.int().min(1),
    of: z.int().min(1).max(MAX_ALERT_WINDOW),
  })
  .superRefine((rule, ctx) => {
    if (!(rule.clear_below < rule.above)) {
      ctx.addIssue({ code: 'custom', path: ['clear_below'], message: 'clear_below must be below above' });
    }
    if (rule.k > rule.of) {
      ctx.addIssue({ code: 'custom', path: ['k'], message: 'k must not exceed of' });
    }
  });
export type AlertRule = z.infer<typeof alertRuleSchema>;

export const QUEUE_POLICIES = ['refuse_new', 'drop_oldest', 'keep_latest'] as const;
export type QueuePolicy = (typeof QUEUE_POLICIES)[number];

export const queueSettingsSchema = z.strictObject({
  capacity: z.int().min(1).max(MAX_QUEUE_CAPACITY),
  policy: z.enum(QUEUE_POLICIES),
});
export type QueueSettings = z.infer<typeof queueSettingsSchema>;

const declarationShape = {
  name: streamNameSchema,
  /** Operator description (see docs/operators.md); validated by the daemon. */
  operator: opaqueMapSchema,
  /** Solver settings (see the solvers' docs); validated by the daemon. */
  solver: opaqueMapSchema,
  alerts: z.array(alertRuleSchema).max(MAX_ALERT_RULES).optional(),
  queue: queueSettingsSchema.optional(),
  /** Rms noise per measurement (E|eᵢ|² = σ²; complex noise has σ²/2 in each part), when known. */
  noise_sigma: nonNegativeNumber.optional(),
  note: text.optional(),
};

/** Strict: a producer's typo is an error, not a silently ignored field. */
export const streamDeclarationSchema = z.strictObject(declarationShape);
/** Lenient copy for declarations the daemon echoes to subscribers (it may add fields later). */
export const echoedDeclarationSchema = z.object(declarationShape);

export type StreamDeclaration = z.infer<typeof streamDeclarationSchema>;
