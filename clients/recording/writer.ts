import { closeSync, fsyncSync, openSync, writeSync } from 'node:fs';
import { pack } from 'msgpackr';
import { encode } from '../../protocol/index.js';
import { crc32 } from './crc32.js';
import { CRC_BYTES, FORMAT_VERSION, HEADER_PREFIX_BYTES, MAGIC, RECORD_KINDS, RECORD_PREFIX_BYTES } from './format.js';
import type { RecordedMessage, RecordingHeader } from './types.js';

/**
 * When the writer forces data to disk. Records are written to the file (the operating system's
 * cache) as they come; fsync makes them survive a power loss. A crash loses at most the records
 * since the last fsync, and a torn last record is detected by its CRC when reading.
 */
export interface FsyncPolicy {
  /** fsync after this many records (0 = never by count). */
  everyRecords: number;
  /** fsync when this many ms have passed since the last one with records waiting (0 = never by time). */
  everyMs: number;
}

export const DEFAULT_FSYNC: FsyncPolicy = { everyRecords: 256, everyMs: 1000 };

/** Appends records to a new recording file. Writes are synchronous, so record order is call order. */
export class RecordingWriter {
  readonly #fd: number;
  readonly #policy: FsyncPolicy;
  readonly #timer: NodeJS.Timeout | null;
  #unsynced = 0;
  #lastSync = Date.now();
  #records = 0;
  #bytes = 0;
  #syncs = 0;
  #closed = false;

  /** Creates (or truncates) `path` and writes the header, synced to disk. */
  constructor(path: string, header: RecordingHeader, policy: Partial<FsyncPolicy> = {}) {
    this.#policy = { ...DEFAULT_FSYNC, ...policy };
    this.#fd = openSync(path, 'w');
    const body = pack(header);
    const prefix = new Uint8Array(HEADER_PREFIX_BYTES);
    prefix.set(MAGIC);
    const view = new DataView(prefix.buffer);
    view.setUint16(MAGIC.length, FORMAT_VERSION, true);
    view.setUint32(MAGIC.length + 2, body.byteLength, true);
    const crc = crc32(body, crc32(prefix.subarray(MAGIC.length)));
    this.#write(prefix);
    this.#write(body);
    this.#write(u32(crc));
    fsyncSync(this.#fd);
    this.#timer =
      this.#policy.everyMs > 0
        ? setInterval(() => {
            if (this.#unsynced > 0) this.sync();
          }, this.#policy.everyMs).unref()
        : null;
  }

  get records(): number {
    return this.#records;
  }

  get bytes(): number {
    return this.#bytes;
  }

  /** fsync calls made for records (the header's own sync not counted). */
  get syncs(): number {
    return this.#syncs;
  }

  /** Appends one message (validated and encoded exactly as on the wire). */
  append(message: RecordedMessage, at = Date.now()): void {
    if (this.#closed) throw new Error('recording is closed');
    const bytes = encode(message);
    const prefix = new Uint8Array(RECORD_PREFIX_BYTES);
    const view = new DataView(prefix.buffer);
    view.setUint32(0, bytes.byteLength, true);
    view.setUint8(4, RECORD_KINDS[message.type]);
    view.setFloat64(5, at, true);
    this.#write(prefix);
    this.#write(bytes);
    this.#write(u32(crc32(bytes, crc32(prefix))));
    this.#records++;
    this.#unsynced++;
    const { everyRecords, everyMs } = this.#policy;
    if ((everyRecords > 0 && this.#unsynced >= everyRecords) || (everyMs > 0 && Date.now() - this.#lastSync >= everyMs)) {
      this.sync();
    }
  }

  /** Forces everything written so far to disk. */
  sync(): void {
    if (this.#closed) return;
    fsyncSync(this.#fd);
    this.#syncs++;
    this.#unsynced = 0;
    this.#lastSync = Date.now();
  }

  /** Syncs and closes the file. */
  close(): void {
    if (this.#closed) return;
    if (this.#unsynced > 0) this.sync();
    this.#closed = true;
    if (this.#timer) clearInterval(this.#timer);
    closeSync(this.#fd);
  }

  #write(bytes: Uint8Array): void {
    let offset = 0;
    while (offset < bytes.byteLength) offset += writeSync(this.#fd, bytes, offset);
    this.#bytes += bytes.byteLength;
  }
}

function u32(value: number): Uint8Array {
  const out = new Uint8Array(CRC_BYTES);
  new DataView(out.buffer).setUint32(0, value, true);
  return out;
}
