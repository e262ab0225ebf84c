import { pack, unpack } from 'msgpackr';
import type { z } from 'zod';
import { fieldPath, ProtocolError } from './errors.js';
import { isPlainMap } from './declaration.js';
import { isWellFormedFrame } from './frameCheck.js';
import { MAX_MESSAGE_BYTES, MAX_REF_LENGTH, PROTOCOL_VERSION } from './limits.js';
import { messageSchemas, type Message, type MessageType } from './messages.js';

/**
 * One message = one MessagePack map = one WebSocket binary message. Packing uses msgpackr's
 * module-level `pack` (plain maps, no record extension, typed arrays only as plain `bin`), so any
 * MessagePack library can read and write the format.
 */

/** Deepest nesting accepted inside a message (declarations are a few levels deep). */
const MAX_DEPTH = 32;

/** Validates `msg` against its schema and packs it. Throws ProtocolError on an invalid message. */
export function encode(msg: Message): Uint8Array {
  validate(msg, undefined);
  return packChecked(msg);
}

/**
 * Packs a message this process built itself from typed values, without the schema walk (the
 * daemon's replies, results and notices: one per frame and subscriber, where validating cost as
 * much as the rest of the send). Tests decode what the daemon sends with the validating `decode`.
 */
export function encodeTrusted(msg: Message): Uint8Array {
  return packChecked(msg);
}

function packChecked(msg: Message): Uint8Array {
  const bytes = pack(msg);
  if (bytes.byteLength > MAX_MESSAGE_BYTES) {
    throw new ProtocolError('too_large', `message of ${bytes.byteLength} bytes exceeds ${MAX_MESSAGE_BYTES}`);
  }
  return bytes;
}

/**
 * Decodes exactly one message and validates it. Binary fields in the result are views into
 * `bytes`: copy them out (protocol/bin.ts) before keeping them.
 */
export function decode(bytes: Uint8Array): Message {
  if (!(bytes instanceof Uint8Array)) throw new ProtocolError('malformed', 'expected binary data');
  if (bytes.byteLength > MAX_MESSAGE_BYTES) {
    throw new ProtocolError('too_large', `message of ${bytes.byteLength} bytes exceeds ${MAX_MESSAGE_BYTES}`);
  }
  if (bytes.byteLength === 0) throw new ProtocolError('malformed', 'empty message');
  let raw: unknown;
  try {
    // unpack reads exactly one value and throws on trailing bytes.
    raw = unpack(bytes);
  } catch (err) {
    throw new ProtocolError('malformed', `not a MessagePack message: ${(err as Error).message}`);
  }
  // Only a ref that could be echoed in an `error` reply is kept (an invalid one is itself the error).
  const ref = isPlainMap(raw) && isValidRef(raw.ref) ? raw.ref : undefined;
  if (!isPlainMap(raw)) throw new ProtocolError('not_a_map', 'a message must be a MessagePack map', undefined, ref);
  normalizeIntegers(raw, [], 0, ref);
  return validate(raw, ref);
}

function isValidRef(ref: unknown): ref is string {
  return typeof ref === 'string' && ref.length >= 1 && ref.length <= MAX_REF_LENGTH;
}

function validate(raw: unknown, ref: string | undefined): Message {
  if (!isPlainMap(raw)) throw new ProtocolError('not_a_map', 'a message must be a map', undefined, ref);
  if (raw.v !== PROTOCOL_VERSION) {
    throw new ProtocolError(
      'unsupported_version',
      `protocol version ${JSON.stringify(raw.v) ?? 'missing'} is not supported (this build speaks ${PROTOCOL_VERSION})`,
      'v',
      ref,
    );
  }
  const type = raw.type;
  if (typeof type !== 'string' || !Object.hasOwn(messageSchemas, type)) {
    throw new ProtocolError('unknown_type', `unknown message type ${JSON.stringify(type) ?? 'missing'}`, 'type', ref);
  }
  if (type === 'frame' && isWellFormedFrame(raw)) return raw as Message;
  const schema = messageSchemas[type as MessageType] as z.ZodType<Message>;
  const parsed = schema.safeParse(raw);
  if (parsed.success) return parsed.data;
  const issue = parsed.error.issues[0]!;
  let path: PropertyKey[] = issue.path;
  if (issue.code === 'unrecognized_keys') path = [...issue.path, issue.keys[0]!];
  const message = issue.code === 'unrecognized_keys' ? 'unknown field' : issue.message;
  throw new ProtocolError('invalid_field', message, fieldPath(path), ref);
}

/**
 * msgpackr decodes 64-bit integers (as another language's encoder writes e.g. a millisecond
 * timestamp) to BigInt; the protocol's numbers are JavaScript numbers, so convert the exact ones
 * and reject the rest. Also bounds nesting depth.
 */
function normalizeIntegers(node: Record<string, unknown> | unknown[], path: PropertyKey[], depth: number, ref?: string): void {
  if (depth > MAX_DEPTH) throw new ProtocolError('invalid_field', `nested deeper than ${MAX_DEPTH} levels`, fieldPath(path), ref);
  const entries: Iterable<[PropertyKey, unknown]> = Array.isArray(node) ? node.entries() : Object.entries(node);
  for (const [key, value] of entries) {
    if (typeof value === 'bigint') {
      if (value > BigInt(Number.MAX_SAFE_INTEGER) || value < BigInt(Number.MIN_SAFE_INTEGER)) {
        throw new ProtocolError('invalid_field', 'integer beyond ±(2^53 − 1)', fieldPath([...path, key]), ref);
      }
      (node as Record<PropertyKey, unknown>)[key] = Number(value);
    } else if (Array.isArray(value) || isPlainMap(value)) {
      normalizeIntegers(value, [...path, key], depth + 1, ref);
    }
  }
}
