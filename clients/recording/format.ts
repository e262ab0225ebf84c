import { MAX_MESSAGE_BYTES, type MessageType } from '../../protocol/index.js';

/**
 * The recording file format, version 1 (docs/recording.md has the full description):
 *
 *   file header
 *     magic    8 bytes   "SWREC" 0x0D 0x0A 0x00 (the CR LF and NUL catch text-mode mangling)
 *     version  u16 LE    1
 *     length   u32 LE    length of the header body
 *     body     MessagePack map {created_at, source, note?, streams: [declaration…]}
 *     crc      u32 LE    CRC-32 of version, length and body
 *   records, appended one after another
 *     length   u32 LE    length of the message
 *     kind     u8        which message type follows (RECORD_KINDS)
 *     at       f64 LE    when the recorder saw it, ms since the epoch
 *     message  a protocol message, exactly as on the wire (protocol/codec.ts)
 *     crc      u32 LE    CRC-32 of length, kind, at and message
 */
export const MAGIC = Uint8Array.from([0x53, 0x57, 0x52, 0x45, 0x43, 0x0d, 0x0a, 0x00]);
export const FORMAT_VERSION = 1;
/** Bytes before a header body: magic, version, length. */
export const HEADER_PREFIX_BYTES = MAGIC.length + 2 + 4;
/** Bytes before a record's message: length, kind, at. */
export const RECORD_PREFIX_BYTES = 4 + 1 + 8;
export const CRC_BYTES = 4;
/** Largest header body accepted when reading (declarations of many streams). */
export const MAX_HEADER_BYTES = 16 * 1024 * 1024;

/** Record kinds: the protocol message types a recording holds, with their one-byte codes. */
export const RECORD_KINDS = {
  frame: 1,
  result: 2,
  stream_event: 3,
  alert: 4,
  missed: 5,
} as const satisfies Partial<Record<MessageType, number>>;
export type RecordKind = keyof typeof RECORD_KINDS;
export const KIND_BY_CODE = new Map<number, RecordKind>(
  Object.entries(RECORD_KINDS).map(([name, code]) => [code, name as RecordKind]),
);
export const MAX_RECORD_MESSAGE_BYTES = MAX_MESSAGE_BYTES;
