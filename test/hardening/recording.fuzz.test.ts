import fc from 'fast-check';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseRecording, RecordingError, RecordingWriter, type Recording } from '../../clients/recording/index.js';
import { float64ToBin, uint32ToBin, type FrameMessage, type ResultMessage } from '../../protocol/index.js';
import { fuzzRuns, recordFigures } from './support/scale.js';

// A recording cut or damaged anywhere (docs/recording.md, "Reading a damaged file"): a crash can
// only cut the file; storage faults can flip bits. Oracles: a cut inside the header is refused
// with RecordingError; a cut after it reads back exactly the records that lie wholly before the
// cut, and reports a torn tail of the right size; a flipped bit after the header never yields a
// record that differs from what was written (the CRC-32 catches it), and every record before the
// damaged one reads back intact. Nothing else may be thrown.

const dir = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-recording-fuzz-'));
const file = path.join(dir, 'session.swrec');
const declaration = { name: 'fuzz.s', operator: { kind: 'partial_dft', n: 64, samples: { law: 'uniform', m: 16, seed: 1 } }, solver: { method: 'lasso' } };

const writer = new RecordingWriter(file, { created_at: 1, source: 'test', streams: [declaration] }, { everyRecords: 0, everyMs: 0 });
/** Byte offset where each record ends (the first entry: where the header ends). */
const ends: number[] = [writer.bytes];
for (let seq = 0; seq < 8; seq++) {
  const y = new Float64Array(32).map((_, i) => Math.sin(seq + i));
  const frame: FrameMessage = { v: 1, type: 'frame', stream: 'fuzz.s', seq, time: seq, y: float64ToBin(y) };
  writer.append(frame, 1000 + seq);
  ends.push(writer.bytes);
  const result: ResultMessage = {
    v: 1,
    type: 'result',
    stream: 'fuzz.s',
    seq,
    time: seq,
    solved_at: seq + 0.5,
    flags: seq % 3 === 0 ? ['cold_start'] : [],
    evidence: { relative_residual: 0.01, residual: 0.1, iterations: 12, certificate_kind: 'duality_gap', certificate: 1e-6, converged: true, support_size: 2, added: 0, removed: 0, recoverability: 'safe', solve_ms: 1 },
    coefficients: { indices: uint32ToBin(new Uint32Array([3, 9])), values: float64ToBin(new Float64Array([1, 0, -0.5, 0.25])) },
  };
  writer.append(result, 1000.5 + seq);
  ends.push(writer.bytes);
}
writer.close();
const whole = new Uint8Array(readFileSync(file));
rmSync(dir, { recursive: true, force: true });
const intact = parseRecording(whole);

function sameRecords(a: Recording, b: Recording, count: number): void {
  for (let i = 0; i < count; i++) {
    expect(a.entries[i]!.at).toBe(b.entries[i]!.at);
    expect(Buffer.from(JSON.stringify(a.entries[i]!.message, binAsHex))).toEqual(Buffer.from(JSON.stringify(b.entries[i]!.message, binAsHex)));
  }
}

function binAsHex(_key: string, value: unknown): unknown {
  return value instanceof Uint8Array ? Buffer.from(value).toString('hex') : value;
}

describe('recording reader under cuts and bit flips', () => {
  it('the intact file reads back completely', () => {
    expect(intact.damage).toBeNull();
    expect(intact.entries).toHaveLength(ends.length - 1);
  });

  it('a cut anywhere: the header refused, or exactly the whole records before the cut with a torn tail', () => {
    let cuts = 0;
    fc.assert(
      fc.property(fc.integer({ min: 0, max: whole.length - 1 }), (cut) => {
        cuts++;
        let r: Recording;
        try {
          r = parseRecording(whole.subarray(0, cut));
        } catch (err) {
          expect(err).toBeInstanceOf(RecordingError);
          expect(cut).toBeLessThan(ends[0]!);
          return;
        }
        const complete = ends.filter((e) => e <= cut).length - 1;
        expect(r.entries).toHaveLength(complete);
        sameRecords(r, intact, complete);
        if (cut === ends[complete]) expect(r.damage).toBeNull();
        else expect(r.damage).toMatchObject({ kind: 'torn', offset: ends[complete], bytes: cut - ends[complete]!, record: complete });
      }),
      fuzzRuns({ ci: 400, report: 5000, soak: 50_000 }),
    );
    recordFigures('recording: files cut at random offsets', { inputs: cuts, crashes: 0, wrong_prefix: 0 });
  });

  it('flipped bits: never a wrong record, every record before the damage intact', () => {
    let flips = 0;
    let caught = 0;
    fc.assert(
      // Distinct bits: flipping one bit twice is no damage at all.
      fc.property(fc.uniqueArray(fc.tuple(fc.integer({ min: ends[0]!, max: whole.length - 1 }), fc.integer({ min: 0, max: 7 })), { minLength: 1, maxLength: 3, selector: ([at, bit]) => at * 8 + bit }), (bits) => {
        flips++;
        const damaged = Uint8Array.from(whole);
        for (const [at, bit] of bits) damaged[at]! ^= 1 << bit;
        const r = parseRecording(damaged);
        const first = Math.min(...bits.map(([at]) => ends.findIndex((e) => e > at) - 1));
        // Records wholly before the first flipped byte read back unchanged...
        expect(r.entries.length).toBeGreaterThanOrEqual(first);
        sameRecords(r, intact, first);
        // ...and reading stops at the damaged record: CRC-32 (IEEE 802.3) detects every error of up to
        // three bits in records this short (Hamming distance 4 up to about 91 600 bits: Koopman, "32-Bit
        // Cyclic Redundancy Codes for Internet Applications", DSN 2002; figure from memory).
        expect(r.entries.length).toBe(first);
        expect(r.damage).not.toBeNull();
        caught++;
      }),
      fuzzRuns({ ci: 400, report: 5000, soak: 50_000 }),
    );
    recordFigures('recording: files with flipped bits', { inputs: flips, crashes: 0, damage_detected: caught, wrong_records: 0 });
  });
});
