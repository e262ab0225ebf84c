import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { float64ToBin, uint32ToBin, type StreamDeclaration } from '../../../protocol/index.js';
import { parseRecording, readRecording, RecordingError } from '../reader.js';
import type { RecordedMessage } from '../types.js';
import { RecordingWriter } from '../writer.js';

const dir = mkdtempSync(join(tmpdir(), 'sparsewire-rec-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const declaration: StreamDeclaration = {
  name: 'bench.vib',
  operator: { kind: 'sampling', n: 64, samples: { law: 'uniform', m: 16, seed: 3 }, basis: { kind: 'dft' } },
  solver: { method: 'fista' },
};
const evidence = {
  relative_residual: 0.01, residual: 0.1, iterations: 12, certificate_kind: 'duality_gap', certificate: 1e-7,
  converged: true, support_size: 2, added: 0, removed: 0, recoverability: 'safe', solve_ms: 0.4,
};

function messages(count: number): RecordedMessage[] {
  const out: RecordedMessage[] = [];
  for (let seq = 0; seq < count; seq++) {
    const y = new Float64Array(32).map((_, i) => Math.sin(seq + i));
    out.push({ v: 1, type: 'frame', stream: 'bench.vib', seq, time: 1000 + seq, y: float64ToBin(y) });
    out.push({
      v: 1, type: 'result', stream: 'bench.vib', seq, time: 1000 + seq, solved_at: 1001 + seq, flags: seq === 2 ? ['sequence_gap'] : [], evidence,
      coefficients: { indices: uint32ToBin(new Uint32Array([1, 7])), values: float64ToBin(new Float64Array([seq, 1, -2, 0.5])) },
    });
  }
  out.push({ v: 1, type: 'alert', stream: 'bench.vib', seq: 2, rule: 0, metric: 'iterations', state: 'raised', value: 300, limit: 200 });
  out.push({ v: 1, type: 'missed', stream: 'bench.vib', from_seq: 3, to_seq: 4, count: 2, reason: 'subscriber_behind' });
  out.push({ v: 1, type: 'stream_event', stream: 'other', event: 'declared', declaration: { ...declaration, name: 'other' } });
  return out;
}

function writeSample(name: string, count = 5): { path: string; written: RecordedMessage[]; bytes: Buffer } {
  const path = join(dir, name);
  const writer = new RecordingWriter(path, { created_at: 1234, source: 'test', streams: [declaration] });
  const written = messages(count);
  written.forEach((m, i) => writer.append(m, 5000 + i));
  writer.close();
  return { path, written, bytes: readFileSync(path) };
}

/** Byte offsets where each record starts, found by walking the length fields. */
function recordOffsets(bytes: Buffer): number[] {
  const headerLength = bytes.readUInt32LE(10);
  const offsets: number[] = [];
  for (let offset = 14 + headerLength + 4; offset < bytes.length; offset += 13 + bytes.readUInt32LE(offset) + 4) offsets.push(offset);
  return offsets;
}

/** A comparable text form of a message: bins as hex whatever buffer they sit in. */
function hexOf(value: unknown): string {
  const walk = (v: unknown): unknown =>
    v instanceof Uint8Array
      ? Buffer.from(v).toString('hex')
      : Array.isArray(v)
        ? v.map(walk)
        : v !== null && typeof v === 'object'
          ? Object.fromEntries(Object.entries(v).map(([k, x]) => [k, walk(x)]))
          : v;
  return JSON.stringify(walk(value));
}

describe('recording files', () => {
  it('reads back the header and every record exactly as written', () => {
    const { path, written } = writeSample('roundtrip.swrec');
    const rec = readRecording(path);
    expect(rec.damage).toBeNull();
    expect(rec.header).toEqual({ created_at: 1234, source: 'test', streams: [declaration] });
    expect(rec.entries.map((e) => e.at)).toEqual(written.map((_, i) => 5000 + i));
    expect(rec.entries.map((e) => hexOf(e.message))).toEqual(written.map(hexOf));
  });

  it('keeps the valid prefix of a file cut anywhere inside its last record', () => {
    const { bytes, written } = writeSample('torn.swrec');
    const offsets = recordOffsets(bytes);
    const last = offsets.at(-1)!;
    for (let cut = last + 1; cut < bytes.length; cut += 7) {
      const rec = parseRecording(bytes.subarray(0, cut));
      expect(rec.entries).toHaveLength(written.length - 1);
      expect(rec.damage).toMatchObject({ kind: 'torn', offset: last, record: written.length - 1, bytes: cut - last });
      expect(rec.damage!.message).toMatch(new RegExp(`record ${written.length - 1} at byte ${last}: the file ends`));
    }
    // Cut exactly at a record boundary: a clean, shorter recording.
    expect(parseRecording(bytes.subarray(0, last)).damage).toBeNull();
  });

  it('detects a flipped byte anywhere in a record by its CRC and keeps the records before it', () => {
    const { bytes } = writeSample('flipped.swrec');
    const offsets = recordOffsets(bytes);
    const target = 3;
    const start = offsets[target]!;
    const end = offsets[target + 1]!;
    // Every byte after the length field (a damaged length is caught by the size checks instead).
    for (let at = start + 4; at < end; at += 3) {
      const damaged = Buffer.from(bytes);
      damaged[at]! ^= 0x10;
      const rec = parseRecording(damaged);
      expect(rec.entries).toHaveLength(target);
      expect(rec.damage).toMatchObject({ kind: 'corrupt', record: target, offset: start });
      expect(rec.damage!.message).toMatch(/CRC mismatch/);
    }
  });

  it('refuses files that are not recordings or whose header is damaged', () => {
    const { bytes } = writeSample('header.swrec');
    expect(() => parseRecording(Buffer.from('hello world, not a recording'))).toThrow(RecordingError);
    const badVersion = Buffer.from(bytes);
    badVersion.writeUInt16LE(9, 8);
    expect(() => parseRecording(badVersion)).toThrow(/format version 9/);
    const badHeader = Buffer.from(bytes);
    badHeader[20]! ^= 1;
    expect(() => parseRecording(badHeader)).toThrow(/header fails its CRC check/);
    expect(() => parseRecording(bytes.subarray(0, 20))).toThrow(/header is truncated/);
    const path = join(dir, 'garbage.swrec');
    writeFileSync(path, 'x');
    expect(() => readRecording(path)).toThrow(/not a sparsewire recording/);
  });

  it('syncs by record count and on close', () => {
    const path = join(dir, 'sync.swrec');
    const writer = new RecordingWriter(path, { created_at: 0, source: 'test', streams: [] }, { everyRecords: 4, everyMs: 0 });
    const all = messages(5); // 13 messages
    all.forEach((m) => writer.append(m));
    expect(writer.syncs).toBe(3); // after records 4, 8 and 12
    writer.close();
    expect(writer.syncs).toBe(4); // the 13th on close
    expect(() => writer.append(all[0]!)).toThrow(/closed/);
    expect(readRecording(path).entries).toHaveLength(13);
  });
});
