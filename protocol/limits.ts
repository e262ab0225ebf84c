/**
 * Hard limits of protocol version 1. Both ends enforce them: the codec rejects messages that
 * break them, and the daemon sets its WebSocket `maxPayload` to MAX_MESSAGE_BYTES (msgpackr has
 * no size option of its own, so the transport bound is also the decode bound).
 */
export const PROTOCOL_VERSION = 1;

/** Largest WebSocket message, in bytes (one MessagePack map). */
export const MAX_MESSAGE_BYTES = 4 * 1024 * 1024;
/** Largest measurement vector of one frame, in complex entries (16 bytes each on the wire). */
export const MAX_MEASUREMENTS = 65_536;
/** Largest coefficient or signal vector in a result, in complex entries. */
export const MAX_UNKNOWNS = 131_072;
/** Stream names: 1..64 characters. */
export const MAX_STREAM_NAME_LENGTH = 64;
/** Request references (`ref`) and subscription ids: 1..64 characters. */
export const MAX_REF_LENGTH = 64;
/** Free-text fields (`note`, `detail`). */
export const MAX_TEXT_LENGTH = 1024;
/** Alert rules per stream. */
export const MAX_ALERT_RULES = 16;
/** Longest alert window (`of`), in frames. */
export const MAX_ALERT_WINDOW = 1000;
/** Largest per-stream queue the producer may ask for, in frames. */
export const MAX_QUEUE_CAPACITY = 10_000;
/** Largest `top_k` a subscriber may ask for. */
export const MAX_TOP_K = 1024;
/** Stream names or patterns in one subscription. */
export const MAX_SUBSCRIBE_PATTERNS = 64;
/** Streams named in one subscription's `resume_after` (each is checked and looked up). */
export const MAX_RESUME_STREAMS = 4096;
/** Quality flags on one result. */
export const MAX_FLAGS = 32;
/** Sequence numbers are integers in [0, 2^53 − 1] (exact in a float64 and in JavaScript). */
export const MAX_SEQ = Number.MAX_SAFE_INTEGER;

/** What the daemon applies when a declaration has no `queue`. */
export const DEFAULT_QUEUE = { capacity: 32, policy: 'refuse_new' } as const;
