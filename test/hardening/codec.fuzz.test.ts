import fc from 'fast-check';
import { pack } from 'msgpackr';
import v8 from 'node:v8';
import { describe, expect, it } from 'vitest';
import {
  decode,
  encode,
  MAX_MESSAGE_BYTES,
  MAX_RESUME_STREAMS,
  MESSAGE_TYPES,
  ProtocolError,
  type Message,
  type ProtocolErrorCode,
} from '../../protocol/index.js';
import { EXAMPLES } from '../../protocol/test/examples.js';
import { applyEdit, dotted, editOf, hostileNumber, mutatedBytes, related } from './support/hostile.js';
import { fuzzRuns, recordFigures } from './support/scale.js';

// The protocol decoder under hostile input. Oracle (docs/protocol.md, "Encoding" and "Errors"):
// every input either decodes to a message that validates and re-encodes to the same content, or
// is refused with a ProtocolError carrying one of the six codec codes, a message, and a `ref`
// only when that ref could be echoed in an `error` reply (1..64 characters). Anything else
// (another exception, an unencodable reply) is a crash in the daemon, which decodes every
// WebSocket message with this function.

const CODEC_CODES: readonly ProtocolErrorCode[] = ['malformed', 'too_large', 'not_a_map', 'unsupported_version', 'unknown_type', 'invalid_field'];

const SEEDS: Message[] = MESSAGE_TYPES.flatMap((t) => EXAMPLES[t]);

type Outcome = { ok: true; msg: Message } | { ok: false; err: ProtocolError };

class Tally {
  readonly counts = new Map<string, number>();
  inputs = 0;
  add(o: Outcome): void {
    this.inputs++;
    const key = o.ok ? 'accepted' : o.err.code;
    this.counts.set(key, (this.counts.get(key) ?? 0) + 1);
  }
  figures(): Record<string, number> {
    return { inputs: this.inputs, crashes: 0, ...Object.fromEntries(this.counts) };
  }
}

/** Decodes and checks the oracle; throws (failing the property) on anything else. */
function judge(bytes: Uint8Array): Outcome {
  let msg: Message;
  try {
    msg = decode(bytes);
  } catch (err) {
    if (!(err instanceof ProtocolError)) throw new Error(`decode threw ${String(err)} instead of a ProtocolError`, { cause: err });
    expect(CODEC_CODES).toContain(err.code);
    expect(err.message.length).toBeGreaterThan(0);
    // The daemon answers with exactly this error message: it must encode.
    encode({ v: 1, type: 'error', code: err.code, detail: err.message, ...(err.ref !== undefined ? { ref: err.ref } : {}), ...(err.field !== undefined ? { field: err.field } : {}) });
    return { ok: false, err };
  }
  // Accepted: the message is valid, so it re-encodes and decodes to the same content.
  const again = decode(encode(msg));
  expect(comparable(again)).toEqual(comparable(msg));
  return { ok: true, msg };
}

function comparable(v: unknown): unknown {
  if (v instanceof Uint8Array) return Buffer.from(v).toString('hex');
  if (Array.isArray(v)) return v.map(comparable);
  if (v !== null && typeof v === 'object') return Object.fromEntries(Object.entries(v).map(([k, x]) => [k, comparable(x)]));
  return Object.is(v, -0) ? 0 : v;
}

/**
 * `msg` with a value nested `depth` arrays deep inside its operator, written byte by byte
 * (MessagePack spec: 0x91 = fixarray of one entry, 0x01 = positive fixint 1): encoders give up
 * long before a hostile sender does.
 */
function withDeepValue(msg: Message, depth: number): Uint8Array {
  const marker = 'deep-value-goes-here';
  const holder = { ...msg, stream: { ...(msg as { stream: object }).stream, operator: { kind: 'gabor', extra: marker } } };
  const bytes = pack(holder);
  const needle = Buffer.from(pack(marker));
  const at = Buffer.from(bytes).indexOf(needle);
  const tower = new Uint8Array(depth + 1).fill(0x91);
  tower[depth] = 0x01;
  return Uint8Array.from([...bytes.subarray(0, at), ...tower, ...bytes.subarray(at + needle.length)]);
}

describe('protocol decoder under hostile input', () => {
  it('random bytes: a clear error, never a crash', () => {
    const tally = new Tally();
    fc.assert(
      fc.property(fc.oneof(fc.uint8Array({ maxLength: 64 }), fc.uint8Array({ minLength: 64, maxLength: 4096 })), (bytes) => {
        const o = judge(bytes);
        tally.add(o);
      }),
      fuzzRuns({ ci: 3000, report: 50_000, soak: 1_000_000 }),
    );
    recordFigures('decoder: random bytes', tally.figures());
  });

  it('byte-level mutations of valid messages (bit flips, truncation, splices, huge length headers)', () => {
    const tally = new Tally();
    const seeded = fc.constantFrom(...SEEDS.map((m) => encode(m))).chain((bytes) => mutatedBytes(bytes));
    fc.assert(
      fc.property(seeded, (bytes) => tally.add(judge(bytes))),
      fuzzRuns({ ci: 4000, report: 100_000, soak: 2_000_000 }),
    );
    recordFigures('decoder: mutated valid messages', tally.figures());
  });

  it('structure-aware edits (wrong types, NaN, infinities, huge and negative numbers, deep nesting, unknown and missing fields): the error names the field', () => {
    const tally = new Tally();
    let named = 0;
    const edited = fc.constantFrom(...SEEDS).chain((msg) => editOf(msg).map((edit) => ({ msg, edit })));
    fc.assert(
      fc.property(edited, ({ msg, edit }) => {
        const changed = applyEdit(msg, edit);
        const o = judge(pack(changed));
        tally.add(o);
        if (o.ok || o.err.code !== 'invalid_field') return;
        // An invalid field is named, and the name points at the edit (or the map that holds it).
        expect(o.err.field).toBeDefined();
        const edited = edit.kind === 'add' ? dotted([...edit.path, edit.key]) : dotted(edit.path);
        const holder = edit.kind === 'add' ? dotted(edit.path) : dotted(edit.path.slice(0, -1));
        expect(related(o.err.field!, edited) || related(o.err.field!, holder) || o.err.field === '').toBe(true);
        named++;
      }),
      fuzzRuns({ ci: 4000, report: 100_000, soak: 2_000_000 }),
    );
    recordFigures('decoder: structure-aware field edits', { ...tally.figures(), invalid_field_named: named });
  });

  it('unknown versions and types are refused as such', () => {
    const tally = new Tally();
    fc.assert(
      fc.property(fc.constantFrom(...SEEDS), fc.oneof(hostileNumber, fc.string({ maxLength: 10 }), fc.constant(null), fc.integer({ min: 2, max: 1000 })), (msg, v) => {
        fc.pre(v !== 1);
        const o = judge(pack({ ...msg, v }));
        tally.add(o);
        expect(!o.ok && o.err.code).toBe('unsupported_version');
        expect(!o.ok && o.err.field).toBe('v');
      }),
      fuzzRuns({ ci: 500, report: 10_000, soak: 100_000 }),
    );
    fc.assert(
      fc.property(fc.constantFrom(...SEEDS), fc.oneof(fc.string({ maxLength: 20 }), hostileNumber, fc.constant(null)), (msg, type) => {
        fc.pre(!(typeof type === 'string' && (MESSAGE_TYPES as string[]).includes(type)));
        const o = judge(pack({ ...msg, type }));
        tally.add(o);
        expect(!o.ok && o.err.code).toBe('unknown_type');
      }),
      fuzzRuns({ ci: 500, report: 10_000, soak: 100_000 }),
    );
    recordFigures('decoder: unknown versions and types', tally.figures());
  });

  it('size limits: over 4 MiB is refused before parsing, resume_after is bounded by count, huge claimed lengths allocate nothing', () => {
    // MAX_MESSAGE_BYTES is the documented bound (docs/protocol.md, "Limits").
    const oversized = new Uint8Array(MAX_MESSAGE_BYTES + 1);
    oversized[0] = 0x80;
    expect(() => decode(oversized)).toThrow(expect.objectContaining({ code: 'too_large' }));

    // The one map whose entries a sender chooses freely is bounded by count before its entries
    // are checked (MAX_RESUME_STREAMS, docs/protocol.md "Limits").
    const resume = (n: number) => Object.fromEntries(Array.from({ length: n }, (_, i) => [`s${i}`, i]));
    const subscribe = { v: 1, type: 'subscribe', ref: 'r', streams: '*', want: ['quality'], when_behind: 'keep_latest' };
    expect(judge(pack({ ...subscribe, resume_after: resume(MAX_RESUME_STREAMS) })).ok).toBe(true);
    const over = judge(pack({ ...subscribe, resume_after: resume(MAX_RESUME_STREAMS + 1) }));
    expect(!over.ok && [over.err.code, over.err.field]).toEqual(['invalid_field', 'resume_after']);

    // A 9-byte message claiming a 4 GiB array, map, string, bin or extension, inside a valid frame
    // or alone: the decoder must notice the data is not there rather than reserve room for it.
    const frame = encode(EXAMPLES.frame[0]!);
    const headers = [0xdd, 0xdf, 0xc6, 0xdb, 0xc9].map((h) => Uint8Array.from([h, 0xff, 0xff, 0xff, 0xfe, 0x01, 0x02, 0x03]));
    const heapLimit = 64 * 1024 * 1024;
    const baseline = v8.getHeapStatistics().total_heap_size;
    let peakGrowth = 0;
    let inputs = 0;
    fc.assert(
      fc.property(fc.constantFrom(...headers), fc.integer({ min: 0, max: frame.length }), fc.boolean(), (header, at, alone) => {
        const bytes = alone ? header : Uint8Array.from([...frame.subarray(0, at), ...header, ...frame.subarray(at)]);
        const o = judge(bytes);
        inputs++;
        expect(o.ok).toBe(false);
        peakGrowth = Math.max(peakGrowth, v8.getHeapStatistics().total_heap_size - baseline);
      }),
      fuzzRuns({ ci: 1000, report: 20_000, soak: 200_000 }),
    );
    // Generous: one real 4 GiB reservation (or even 64 MiB) would show; ordinary garbage does not.
    expect(peakGrowth).toBeLessThan(heapLimit);
    recordFigures('decoder: huge claimed lengths', { inputs, crashes: 0, heap_growth_mib: Math.round((peakGrowth / 2 ** 20) * 10) / 10, heap_bound_mib: heapLimit / 2 ** 20 });
  });

  it('deep nesting: refused at 32 levels inside a message, and a 4 MiB tower of arrays does not overflow anything', () => {
    const tally = new Tally();
    fc.assert(
      fc.property(fc.integer({ min: 33, max: 5000 }), fc.constantFrom(...SEEDS.filter((m) => m.type === 'declare')), (depth, msg) => {
        const o = judge(withDeepValue(msg, depth));
        tally.add(o);
        expect(o.ok).toBe(false);
      }),
      fuzzRuns({ ci: 200, report: 2000, soak: 20_000 }),
    );
    // 4 MiB of fixarray-of-one headers: four million levels (MessagePack spec: 0x91 = fixarray, 1 entry).
    const tower = new Uint8Array(MAX_MESSAGE_BYTES).fill(0x91);
    const o = judge(tower);
    tally.add(o);
    expect(o.ok).toBe(false);
    recordFigures('decoder: deep nesting', tally.figures());
  });
});
