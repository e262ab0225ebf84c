import { z } from 'zod';
import {
  echoedDeclarationSchema,
  finiteNumber,
  isPlainMap,
  nonNegativeNumber,
  streamDeclarationSchema,
  streamNameSchema,
  streamPatternSchema,
} from './declaration.js';
import {
  MAX_FLAGS,
  MAX_MEASUREMENTS,
  MAX_REF_LENGTH,
  MAX_RESUME_STREAMS,
  MAX_SEQ,
  MAX_SUBSCRIBE_PATTERNS,
  MAX_TOP_K,
  MAX_UNKNOWNS,
  PROTOCOL_VERSION,
} from './limits.js';

export type { AlertMetric, AlertRule, QueuePolicy, QueueSettings, StreamDeclaration } from './declaration.js';

/**
 * Every message of protocol version 1. Requests from producers and subscribers are strict
 * (unknown fields are errors); messages from the daemon are lenient (unknown fields are dropped),
 * so a newer daemon can add optional fields without breaking older clients.
 */

const version = z.literal(PROTOCOL_VERSION);
const ref = z.string().min(1).max(MAX_REF_LENGTH);
const seq = z.int().min(0).max(MAX_SEQ);
const count = z.int().min(0);
/** Evidence values may legitimately be non-finite (an infinite gap before the first iteration). */
const anyNumber = z.custom<number>((v) => typeof v === 'number', { message: 'expected a number' });

/** Bytes of `unit`-byte elements, at most `maxElements` of them, at least one. */
function bytes(unit: number, maxElements: number) {
  return z.custom<Uint8Array>((b) => b instanceof Uint8Array, { message: 'expected bytes (MessagePack bin)' }).superRefine((b, ctx) => {
    if (b.byteLength === 0) ctx.addIssue({ code: 'custom', message: 'is empty' });
    else if (b.byteLength % unit !== 0) {
      ctx.addIssue({ code: 'custom', message: `${b.byteLength} bytes is not a multiple of ${unit}` });
    } else if (b.byteLength / unit > maxElements) {
      ctx.addIssue({ code: 'custom', message: `more than ${maxElements} entries` });
    }
  });
}

/** Little-endian Float64 interleaved complex vector (16 bytes per entry). */
const complexBin = (maxEntries: number) => bytes(16, maxEntries);

const wireSparseSchema = z
  .object({ indices: bytes(4, MAX_UNKNOWNS), values: complexBin(MAX_UNKNOWNS) })
  .superRefine((s, ctx) => {
    if (s.values.byteLength !== 4 * s.indices.byteLength) {
      ctx.addIssue({
        code: 'custom',
        path: ['values'],
        message: `${s.indices.byteLength / 4} indices but ${s.values.byteLength / 16} complex values`,
      });
    }
  });

// ---------------------------------------------------------------- producer → daemon

export const declareSchema = z.strictObject({
  v: version,
  type: z.literal('declare'),
  ref,
  stream: streamDeclarationSchema,
});

export const frameSchema = z.strictObject({
  v: version,
  type: z.literal('frame'),
  stream: streamNameSchema,
  seq,
  /** Acquisition time, milliseconds since the Unix epoch (fractions allowed). */
  time: nonNegativeNumber,
  /** Measurements: Float64 LE interleaved complex, 16·m bytes. */
  y: complexBin(MAX_MEASUREMENTS),
  /** Noise standard deviation for this frame, overriding the declaration's noise_sigma. */
  sigma: nonNegativeNumber.optional(),
});

export const closeSchema = z.strictObject({
  v: version,
  type: z.literal('close'),
  ref,
  stream: streamNameSchema,
});

// ---------------------------------------------------------------- daemon → producer

export const declaredSchema = z.object({
  v: version,
  type: z.literal('declared'),
  ref,
  stream: streamNameSchema,
  /** Frames the producer may send now (absolute: replaces any earlier count). */
  credits: count,
  /** The sequence number the daemon expects next; null when it has no history of the stream. */
  next_seq: seq.nullable(),
});

export const creditSchema = z.object({
  v: version,
  type: z.literal('credit'),
  stream: streamNameSchema,
  /** Frames added to the producer's allowance. */
  grant: z.int().min(1),
});

export const ackSchema = z.object({
  v: version,
  type: z.literal('ack'),
  stream: streamNameSchema,
  /** Every frame with seq ≤ through_seq is done: solved and published, or dropped and announced. */
  through_seq: seq,
  /** Frames solved since the previous ack of this stream. */
  solved: count,
  /** Frames dropped (by the queue policy) since the previous ack of this stream. */
  dropped: count,
});

export const REFUSAL_REASONS = [
  'no_credit',
  'queue_full',
  'duplicate',
  'out_of_order',
  'wrong_length',
  'not_finite',
  'bad_sigma',
  'unknown_stream',
  'forbidden',
  'stream_closing',
  'shutting_down',
] as const;
export type RefusalReason = (typeof REFUSAL_REASONS)[number];

export const refusedSchema = z.object({
  v: version,
  type: z.literal('refused'),
  stream: streamNameSchema,
  seq,
  /** One of REFUSAL_REASONS (clients accept unknown reasons from newer daemons). */
  reason: z.string(),
  detail: z.string(),
});

export const closedSchema = z.object({
  v: version,
  type: z.literal('closed'),
  ref,
  stream: streamNameSchema,
});

// ---------------------------------------------------------------- both directions from the daemon

export const ERROR_CODES = [
  'malformed',
  'too_large',
  'not_a_map',
  'unsupported_version',
  'unknown_type',
  'invalid_field',
  'unauthorized',
  'forbidden',
  'unknown_stream',
  'declaration_conflict',
  'wrong_endpoint',
  'limit_reached',
  'shutting_down',
  'internal',
] as const;
export type ErrorCode = (typeof ERROR_CODES)[number];

export const errorSchema = z.object({
  v: version,
  type: z.literal('error'),
  ref: ref.optional(),
  stream: z.string().optional(),
  /** One of ERROR_CODES (clients accept unknown codes from newer daemons). */
  code: z.string(),
  detail: z.string(),
  field: z.string().optional(),
});

// ---------------------------------------------------------------- subscriber → daemon

export const WANTS = ['coefficients', 'top_k', 'signal', 'measurements', 'quality', 'alerts'] as const;
export type Want = (typeof WANTS)[number];

export const BEHIND_POLICIES = ['keep_latest', 'drop_with_notice', 'disconnect'] as const;
export type BehindPolicy = (typeof BEHIND_POLICIES)[number];

export const subscribeSchema = z.strictObject({
  v: version,
  type: z.literal('subscribe'),
  ref,
  /** One glob pattern or a list of names/patterns ('*' matches any run of characters). */
  streams: z.union([streamPatternSchema, z.array(streamPatternSchema).min(1).max(MAX_SUBSCRIBE_PATTERNS)]),
  want: z.array(z.enum(WANTS)).min(1).max(WANTS.length),
  /** How many of the largest coefficients `top_k` carries (default 8). */
  top_k: z.int().min(1).max(MAX_TOP_K).optional(),
  when_behind: z.enum(BEHIND_POLICIES),
  /**
   * Resume after a reconnect: per stream, the last seq this subscriber received, or −1 when it
   * knows the stream but has received none of its results. The daemon first sends the retained
   * results after it (and a `missed` notice for any it no longer holds).
   */
  resume_after: z
    .custom<Record<string, number>>(isPlainMap, { message: 'expected a map of stream name to seq' })
    // Counted before the entries are checked: a 4 MiB map holds some 400 000 of them.
    .refine((m) => Object.keys(m).length <= MAX_RESUME_STREAMS, { message: `names more than ${MAX_RESUME_STREAMS} streams` })
    .pipe(z.record(streamNameSchema, z.int().min(-1).max(MAX_SEQ)))
    .optional(),
});

export const unsubscribeSchema = z.strictObject({
  v: version,
  type: z.literal('unsubscribe'),
  ref,
  id: ref,
});

// ---------------------------------------------------------------- daemon → subscriber

export const subscribedSchema = z.object({
  v: version,
  type: z.literal('subscribed'),
  ref,
  /** The subscription's id, for unsubscribe. */
  id: ref,
  /** Declarations of the streams that match now; later ones arrive as stream_event. */
  streams: z.array(echoedDeclarationSchema),
});

export const unsubscribedSchema = z.object({
  v: version,
  type: z.literal('unsubscribed'),
  ref,
  id: ref,
});

export const evidenceSchema = z.object({
  relative_residual: anyNumber,
  residual: anyNumber,
  iterations: count,
  certificate_kind: z.string(),
  certificate: anyNumber,
  converged: z.boolean(),
  support_size: count,
  /** Support entries gained and lost against the previous frame. */
  added: count,
  removed: count,
  /** Verdict from the phase-transition table: 'safe' | 'marginal' | 'unlikely'. */
  recoverability: z.string(),
  solve_ms: anyNumber,
});
export type Evidence = z.infer<typeof evidenceSchema>;

export const resultSchema = z.object({
  v: version,
  type: z.literal('result'),
  stream: streamNameSchema,
  seq,
  /** The frame's acquisition time (ms since epoch). */
  time: finiteNumber,
  /** When the daemon finished solving it (ms since epoch). */
  solved_at: finiteNumber,
  flags: z.array(z.string()).max(MAX_FLAGS),
  evidence: evidenceSchema,
  /** The nonzero coefficients (support and values). */
  coefficients: wireSparseSchema.optional(),
  /** The `top_k` largest coefficients by magnitude, largest first. */
  top_k: wireSparseSchema.optional(),
  /** The recovered signal (basis synthesis of the coefficients), Float64 LE interleaved complex. */
  signal: complexBin(MAX_UNKNOWNS).optional(),
  /** With want 'measurements': the frame's y exactly as the producer sent it (for recorders). */
  y: complexBin(MAX_MEASUREMENTS).optional(),
  /** With want 'measurements': the frame's own noise level, when it had one. */
  sigma: nonNegativeNumber.optional(),
});

export const alertSchema = z.object({
  v: version,
  type: z.literal('alert'),
  stream: streamNameSchema,
  /** The frame whose result changed the alert's state. */
  seq,
  /** Index of the rule in the declaration's `alerts`. */
  rule: count,
  metric: z.string(),
  state: z.enum(['raised', 'cleared']),
  /** The metric's value on that frame. */
  value: anyNumber,
  /** `above` when raised, `clear_below` when cleared. */
  limit: anyNumber,
});

export const missedSchema = z.object({
  v: version,
  type: z.literal('missed'),
  stream: streamNameSchema,
  from_seq: seq,
  to_seq: seq,
  /** Results missed in [from_seq, to_seq] (fewer than the span when seqs had gaps). */
  count: count,
  /** 'subscriber_behind' | 'dropped_by_queue' | 'not_retained' (open set). */
  reason: z.string(),
});

export const streamEventSchema = z.object({
  v: version,
  type: z.literal('stream_event'),
  stream: streamNameSchema,
  event: z.enum(['declared', 'closed']),
  /** Present with 'declared'. */
  declaration: echoedDeclarationSchema.optional(),
});

// ---------------------------------------------------------------- registry

export const messageSchemas = {
  declare: declareSchema,
  frame: frameSchema,
  close: closeSchema,
  declared: declaredSchema,
  credit: creditSchema,
  ack: ackSchema,
  refused: refusedSchema,
  closed: closedSchema,
  error: errorSchema,
  subscribe: subscribeSchema,
  unsubscribe: unsubscribeSchema,
  subscribed: subscribedSchema,
  unsubscribed: unsubscribedSchema,
  result: resultSchema,
  alert: alertSchema,
  missed: missedSchema,
  stream_event: streamEventSchema,
} as const;

export type MessageType = keyof typeof messageSchemas;
export const MESSAGE_TYPES = Object.keys(messageSchemas) as MessageType[];

export type DeclareMessage = z.infer<typeof declareSchema>;
export type FrameMessage = z.infer<typeof frameSchema>;
export type CloseMessage = z.infer<typeof closeSchema>;
export type DeclaredMessage = z.infer<typeof declaredSchema>;
export type CreditMessage = z.infer<typeof creditSchema>;
export type AckMessage = z.infer<typeof ackSchema>;
export type RefusedMessage = z.infer<typeof refusedSchema>;
export type ClosedMessage = z.infer<typeof closedSchema>;
export type ErrorMessage = z.infer<typeof errorSchema>;
export type SubscribeMessage = z.infer<typeof subscribeSchema>;
export type UnsubscribeMessage = z.infer<typeof unsubscribeSchema>;
export type SubscribedMessage = z.infer<typeof subscribedSchema>;
export type UnsubscribedMessage = z.infer<typeof unsubscribedSchema>;
export type ResultMessage = z.infer<typeof resultSchema>;
export type AlertMessage = z.infer<typeof alertSchema>;
export type MissedMessage = z.infer<typeof missedSchema>;
export type StreamEventMessage = z.infer<typeof streamEventSchema>;

/** Any message of type T. */
export type MessageOf<T extends MessageType> = z.infer<(typeof messageSchemas)[T]>;
export type Message = { [T in MessageType]: MessageOf<T> }[MessageType];

export type ProducerToDaemon = DeclareMessage | FrameMessage | CloseMessage;
export type DaemonToProducer =
  | DeclaredMessage
  | CreditMessage
  | AckMessage
  | RefusedMessage
  | ClosedMessage
  | ErrorMessage;
export type SubscriberToDaemon = SubscribeMessage | UnsubscribeMessage;
export type DaemonToSubscriber =
  | SubscribedMessage
  | UnsubscribedMessage
  | ResultMessage
  | AlertMessage
  | MissedMessage
  | StreamEventMessage
  | ErrorMessage;
