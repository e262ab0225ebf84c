import { readFileSync } from 'node:fs';
import { unpack } from 'msgpackr';
import { decode, echoedDeclarationSchema, isPlainMap, ProtocolError, type StreamDeclaration } from '../../protocol/index.js';
import { crc32 } from './crc32.js';
import {
  CRC_BYTES,
  FORMAT_VERSION,
  HEADER_PREFIX_BYTES,
  KIND_BY_CODE,
  MAGIC,
  MAX_HEADER_BYTES,
  MAX_RECORD_MESSAGE_BYTES,
  RECORD_KINDS,
  RECORD_PREFIX_BYTES,
} from './format.js';
import type { RecordedMessage, RecordingEntry, RecordingHeader } from './types.js';

/** The file cannot be used at all (not a recording, or its header is damaged). */
export class RecordingError extends Error {
  override readonly name = 'RecordingError';
}

/** Where and why reading stopped before the end of the file. */
export interface DamagedTail {
  /** Byte offset of the first record that could not be read. */
  offset: number;
  /** Its number, counting from 0. */
  record: number;
  /** Bytes from there to the end of the file. */
  bytes: number;
  /** 'torn' when the file ends inside the record, 'corrupt' when its content is wrong. */
  kind: 'torn' | 'corrupt';
  message: string;
}

export interface Recording {
  header: RecordingHeader;
  /** Every record up to the first damaged one, in file order. */
  entries: RecordingEntry[];
  /** Set when the file does not end cleanly after the last good record. */
  damage: DamagedTail | null;
  /** Size of the file in bytes. */
  size: number;
}

export function readRecording(path: string): Recording {
  return parseRecording(readFileSync(path));
}

/**
 * Parses a recording held in memory. Stops at the first torn or corrupt record and returns the
 * valid prefix with a description of the damage; throws RecordingError only when the header
 * itself is unusable. Binary fields of the returned messages are views into `bytes`.
 */
export function parseRecording(bytes: Uint8Array): Recording {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const header = parseHeader(bytes, view);
  const entries: RecordingEntry[] = [];
  let offset = header.end;
  let damage: DamagedTail | null = null;
  while (offset < bytes.byteLength) {
    const problem = (kind: DamagedTail['kind'], message: string): DamagedTail => ({
      offset,
      record: entries.length,
      bytes: bytes.byteLength - offset,
      kind,
      message: `record ${entries.length} at byte ${offset}: ${message}; the ${entries.length} records before it are intact`,
    });
    const remaining = bytes.byteLength - offset;
    if (remaining < RECORD_PREFIX_BYTES) {
      damage = problem('torn', `the file ends ${remaining} bytes into the record's ${RECORD_PREFIX_BYTES}-byte prefix`);
      break;
    }
    const length = view.getUint32(offset, true);
    const code = view.getUint8(offset + 4);
    const at = view.getFloat64(offset + 5, true);
    if (length > MAX_RECORD_MESSAGE_BYTES) {
      damage = problem('corrupt', `its length field says ${length} bytes, more than any record can hold`);
      break;
    }
    const total = RECORD_PREFIX_BYTES + length + CRC_BYTES;
    if (remaining < total) {
      damage = problem('torn', `the file ends after ${remaining} of its ${total} bytes`);
      break;
    }
    const covered = bytes.subarray(offset, offset + RECORD_PREFIX_BYTES + length);
    const stored = view.getUint32(offset + RECORD_PREFIX_BYTES + length, true);
    const computed = crc32(covered);
    if (stored !== computed) {
      damage = problem('corrupt', `CRC mismatch (stored ${hex(stored)}, computed ${hex(computed)})`);
      break;
    }
    const kind = KIND_BY_CODE.get(code);
    if (!kind) {
      damage = problem('corrupt', `unknown record kind ${code}`);
      break;
    }
    let message: RecordedMessage;
    try {
      message = decode(covered.subarray(RECORD_PREFIX_BYTES)) as RecordedMessage;
    } catch (err) {
      damage = problem('corrupt', `its message does not decode (${(err as ProtocolError).message})`);
      break;
    }
    if (RECORD_KINDS[message.type as keyof typeof RECORD_KINDS] !== code) {
      damage = problem('corrupt', `kind ${kind} holds a ${message.type} message`);
      break;
    }
    entries.push({ at, message });
    offset += total;
  }
  return { header: header.header, entries, damage, size: bytes.byteLength };
}

function parseHeader(bytes: Uint8Array, view: DataView): { header: RecordingHeader; end: number } {
  if (bytes.byteLength < HEADER_PREFIX_BYTES || MAGIC.some((b, i) => bytes[i] !== b)) {
    throw new RecordingError('not a sparsewire recording (the file does not start with the recording magic bytes)');
  }
  const version = view.getUint16(MAGIC.length, true);
  if (version !== FORMAT_VERSION) {
    throw new RecordingError(`recording format version ${version} is not supported (this build reads version ${FORMAT_VERSION})`);
  }
  const length = view.getUint32(MAGIC.length + 2, true);
  const end = HEADER_PREFIX_BYTES + length + CRC_BYTES;
  if (length > MAX_HEADER_BYTES || end > bytes.byteLength) {
    throw new RecordingError(`the recording header is truncated (it claims ${length} bytes)`);
  }
  const stored = view.getUint32(HEADER_PREFIX_BYTES + length, true);
  const computed = crc32(bytes.subarray(MAGIC.length, HEADER_PREFIX_BYTES + length));
  if (stored !== computed) {
    throw new RecordingError(`the recording header fails its CRC check (stored ${hex(stored)}, computed ${hex(computed)})`);
  }
  let raw: unknown;
  try {
    raw = unpack(bytes.subarray(HEADER_PREFIX_BYTES, HEADER_PREFIX_BYTES + length));
  } catch (err) {
    throw new RecordingError(`the recording header does not decode: ${(err as Error).message}`);
  }
  if (!isPlainMap(raw) || typeof raw.created_at !== 'number' || typeof raw.source !== 'string' || !Array.isArray(raw.streams)) {
    throw new RecordingError('the recording header lacks created_at, source or streams');
  }
  const streams: StreamDeclaration[] = raw.streams.map((s, i) => {
    const parsed = echoedDeclarationSchema.safeParse(s);
    if (!parsed.success) throw new RecordingError(`the recording header's stream ${i} is not a valid declaration`);
    return parsed.data;
  });
  const header: RecordingHeader = {
    created_at: raw.created_at,
    source: raw.source,
    streams,
    ...(typeof raw.note === 'string' ? { note: raw.note } : {}),
  };
  return { header, end };
}

function hex(n: number): string {
  return `0x${n.toString(16).toUpperCase().padStart(8, '0')}`;
}
