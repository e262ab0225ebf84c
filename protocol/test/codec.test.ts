import fc from 'fast-check';
import { pack } from 'msgpackr';
import { describe, expect, it } from 'vitest';
import { decode, encode } from '../codec.js';
import { ProtocolError } from '../errors.js';
import { MAX_MEASUREMENTS, MAX_MESSAGE_BYTES } from '../limits.js';
import { MESSAGE_TYPES, frameSchema, type Message } from '../messages.js';
import { isWellFormedFrame } from '../frameCheck.js';
import { EXAMPLES } from './examples.js';

/** Compares two decoded messages; bins compare as bytes whatever their offset in a buffer. */
function normalise(value: unknown): unknown {
  if (value instanceof Uint8Array) return { bytes: Buffer.from(value).toString('hex') };
  if (Array.isArray(value)) return value.map(normalise);
  if (value !== null && typeof value === 'object') {
    return Object.fromEntries(Object.entries(value).map(([k, v]) => [k, normalise(v)]));
  }
  return value;
}

function rejection(bytes: Uint8Array): ProtocolError {
  try {
    decode(bytes);
  } catch (err) {
    expect(err).toBeInstanceOf(ProtocolError);
    return err as ProtocolError;
  }
  throw new Error('decode accepted a message it should reject');
}

/** Packs a raw object without validation (what a foreign or broken encoder could send). */
const raw = (obj: unknown): Uint8Array => pack(obj);

describe('conformance: every message type round-trips', () => {
  it('has an example for every message type', () => {
    expect(Object.keys(EXAMPLES).sort()).toEqual([...MESSAGE_TYPES].sort());
  });

  for (const type of MESSAGE_TYPES) {
    it(`${type}`, () => {
      for (const msg of EXAMPLES[type]) {
        const bytes = encode(msg);
        expect(bytes.byteLength).toBeLessThanOrEqual(MAX_MESSAGE_BYTES);
        const back = decode(bytes);
        expect(normalise(back)).toEqual(normalise(msg));
        // Decoding one message inside a larger buffer (as a socket chunk) reads the same thing.
        const chunk = new Uint8Array(bytes.byteLength + 11);
        chunk.set(bytes, 5);
        expect(normalise(decode(chunk.subarray(5, 5 + bytes.byteLength)))).toEqual(normalise(msg));
      }
    });
  }
});

describe('wire layout matches the MessagePack specification', () => {
  // Byte values from the MessagePack specification (github.com/msgpack/msgpack, spec.md):
  // fixmap 0x80|n, fixstr 0xa0|len, positive fixint 0x00-0x7f, uint8 0xcc, uint64 0xcf,
  // float64 0xcb (big-endian IEEE 754), bin8 0xc4 len, nil 0xc0.
  const hex = (s: string) => Uint8Array.from(Buffer.from(s.replace(/\s+/g, ''), 'hex'));

  it('reads a frame written the way a minimal foreign encoder writes it (fixmap, smallest ints)', () => {
    const bytes = hex(`
      86
      a1 76 01
      a4 74797065 a5 6672616d65
      a6 73747265616d a1 78
      a3 736571 cc c8
      a4 74696d65 cb 3ff8000000000000
      a1 79 c4 10 000000000000f03f 00000000000000c0`);
    const msg = decode(bytes);
    // time: big-endian binary64 0x3FF8000000000000 = 1.5 (IEEE 754: exponent 1023, mantissa .1b).
    expect(msg).toMatchObject({ v: 1, type: 'frame', stream: 'x', seq: 200, time: 1.5 });
    if (msg.type !== 'frame') throw new Error('not a frame');
    // y = [1.0, -2.0] little-endian binary64 (IEEE 754: 1.0 = 0x3ff0000000000000, -2.0 = 0xc000000000000000).
    expect(Buffer.from(msg.y).toString('hex')).toBe('000000000000f03f00000000000000c0');
  });

  it('accepts 64-bit integers from foreign encoders as exact numbers', () => {
    // Millisecond timestamp written as uint64 (0xcf), as msgpack-python writes ints ≥ 2^32.
    const ms = 1_700_000_000_123;
    const bytes = hex(
      `85 a1 76 01 a4 74797065 a5 6672616d65 a6 73747265616d a1 78 a3 736571 00 a4 74696d65 cf ${ms.toString(16).padStart(16, '0')}`,
    );
    // No y: this must fail on y, after time was read as a number.
    const err = rejection(bytes);
    expect(err.field).toBe('y');
    const withY = hex(
      `86 a1 76 01 a4 74797065 a5 6672616d65 a6 73747265616d a1 78 a3 736571 00 a4 74696d65 cf ${ms.toString(16).padStart(16, '0')} a1 79 c4 10 ${'00'.repeat(16)}`,
    );
    expect((decode(withY) as { time: number }).time).toBe(ms);
  });

  it('writes plain maps and plain bin (no record or typed-array extensions)', () => {
    const bytes = encode({ v: 1, type: 'credit', stream: 'x', grant: 2 });
    // Map header: fixmap (0x8N) or map16 (0xde); a record extension would start with ext (0xd4 0x72).
    expect([0xde, 0x84]).toContain(bytes[0]);
    const frame = encode(EXAMPLES.frame[0]!);
    const text = Buffer.from(frame).toString('hex');
    // "y" key (a1 79) followed by bin8 of 48 bytes (c4 30).
    expect(text).toContain('a179c430');
  });
});

describe('rejections', () => {
  it('rejects bytes that are not MessagePack', () => {
    // 0xc7 is ext8, which needs a length and a type byte after it.
    expect(rejection(Uint8Array.of(0xc7)).code).toBe('malformed');
    // 0xc1 is the one byte the MessagePack specification never uses: msgpackr reads it as a marker
    // object, which is not a map at the top level and not a number inside one.
    expect(rejection(Uint8Array.of(0xc1)).code).toBe('not_a_map');
    const c1Grant = rejection(Uint8Array.from(Buffer.from('84a17601a474797065a6637265646974a673747265616da178a56772616e74c1', 'hex')));
    expect([c1Grant.code, c1Grant.field]).toEqual(['invalid_field', 'grant']);
    expect(rejection(new Uint8Array(0)).code).toBe('malformed');
    // A map16 header promising 5 entries, then nothing.
    expect(rejection(Uint8Array.of(0xde, 0x00, 0x05)).code).toBe('malformed');
  });

  it('rejects a truncated message and trailing bytes', () => {
    const bytes = encode(EXAMPLES.frame[0]!);
    expect(rejection(bytes.subarray(0, bytes.byteLength - 3)).code).toBe('malformed');
    const twoMessages = new Uint8Array(bytes.byteLength * 2);
    twoMessages.set(bytes);
    twoMessages.set(bytes, bytes.byteLength);
    expect(rejection(twoMessages).code).toBe('malformed');
  });

  it('rejects non-maps', () => {
    expect(rejection(raw([1, 2, 3])).code).toBe('not_a_map');
    expect(rejection(raw('frame')).code).toBe('not_a_map');
    expect(rejection(raw(null)).code).toBe('not_a_map');
  });

  it('rejects unknown versions and types, naming the field', () => {
    const v2 = rejection(raw({ v: 2, type: 'frame', ref: 'r9' }));
    expect([v2.code, v2.field, v2.ref]).toEqual(['unsupported_version', 'v', 'r9']);
    expect(rejection(raw({ type: 'frame' })).code).toBe('unsupported_version');
    const t = rejection(raw({ v: 1, type: 'hello' }));
    expect([t.code, t.field]).toEqual(['unknown_type', 'type']);
    expect(rejection(raw({ v: 1 })).code).toBe('unknown_type');
    // An inherited property name is not a message type.
    expect(rejection(raw({ v: 1, type: 'toString' })).code).toBe('unknown_type');
  });

  it('rejects wrong field types with the field path', () => {
    const frame = EXAMPLES.frame[0] as Record<string, unknown>;
    const cases: Array<[Record<string, unknown>, string]> = [
      [{ ...frame, seq: -1 }, 'seq'],
      [{ ...frame, seq: 1.5 }, 'seq'],
      [{ ...frame, seq: '3' }, 'seq'],
      [{ ...frame, time: Number.NaN }, 'time'],
      [{ ...frame, time: Infinity }, 'time'],
      [{ ...frame, stream: '' }, 'stream'],
      [{ ...frame, stream: 'has space' }, 'stream'],
      [{ ...frame, stream: 'x'.repeat(65) }, 'stream'],
      [{ ...frame, y: [1, 2] }, 'y'],
      [{ ...frame, sigma: -0.1 }, 'sigma'],
      [{ ...frame, extra: 1 }, 'extra'],
    ];
    for (const [msg, field] of cases) {
      const err = rejection(raw(msg));
      expect([err.code, err.field]).toEqual(['invalid_field', field]);
    }
  });

  it('rejects bins of the wrong length', () => {
    const frame = EXAMPLES.frame[0] as Record<string, unknown>;
    for (const length of [0, 8, 15, 17]) {
      const err = rejection(raw({ ...frame, y: new Uint8Array(length) }));
      expect([err.code, err.field]).toEqual(['invalid_field', 'y']);
    }
    const tooMany = rejection(raw({ ...frame, y: new Uint8Array(16 * (MAX_MEASUREMENTS + 1)) }));
    expect(tooMany.field).toBe('y');
    const result = EXAMPLES.result[1] as Record<string, unknown> & { coefficients: Record<string, unknown> };
    const mismatch = rejection(raw({ ...result, coefficients: { ...result.coefficients, values: new Uint8Array(16) } }));
    expect([mismatch.code, mismatch.field]).toEqual(['invalid_field', 'coefficients.values']);
    const oddIndices = rejection(raw({ ...result, top_k: { ...result.coefficients, indices: new Uint8Array(6) } }));
    expect(oddIndices.field).toBe('top_k.indices');
  });

  it('rejects oversized messages before decoding', () => {
    expect(rejection(new Uint8Array(MAX_MESSAGE_BYTES + 1)).code).toBe('too_large');
  });

  it('rejects integers that a float64 cannot hold exactly', () => {
    const hex = '85a17601a474797065a56672616d65a673747265616da178a3736571cf0020000000000000a474696d6500';
    const err = rejection(Uint8Array.from(Buffer.from(hex, 'hex')));
    expect([err.code, err.field]).toEqual(['invalid_field', 'seq']);
  });

  it('rejects absurd nesting', () => {
    let deep: unknown = 1;
    for (let i = 0; i < 40; i++) deep = { a: deep };
    const err = rejection(raw({ v: 1, type: 'declare', ref: 'r', stream: { name: 'x', operator: deep, solver: {} } }));
    expect(err.code).toBe('invalid_field');
    expect(err.field?.startsWith('stream.operator.a.a')).toBe(true);
  });

  it('refuses to encode an invalid message', () => {
    const bad = { ...EXAMPLES.frame[0]!, y: new Float64Array(2) } as unknown as Message;
    expect(() => encode(bad)).toThrow(ProtocolError);
  });
});

describe('frames: the direct check agrees with the schema', () => {
  // Frames skip the schema walk when isWellFormedFrame accepts them, so it must never accept
  // what frameSchema refuses; and it must accept ordinary frames, or the fast path is dead code.
  /** Mostly a valid value, sometimes a wrong one: both sides of the check get exercised. */
  const mostly = <T,>(valid: fc.Arbitrary<T>, wrong: fc.Arbitrary<unknown>) =>
    fc.oneof({ arbitrary: valid as fc.Arbitrary<unknown>, weight: 12 }, { arbitrary: wrong, weight: 1 });
  const nearFrame = fc.record(
    {
      v: mostly(fc.constant(1), fc.constantFrom(2, '1', 1.5)),
      type: mostly(fc.constant('frame'), fc.constantFrom('frames', 'close')),
      stream: mostly(fc.constantFrom('plant.a', 'a', 'A-9_x.y'), fc.oneof(fc.constantFrom('.bad', '', 'x'.repeat(300), 'sp ace'), fc.string())),
      seq: mostly(fc.nat(), fc.oneof(fc.integer({ max: -1 }), fc.double(), fc.constant(Number.MAX_SAFE_INTEGER + 2))),
      time: mostly(fc.double({ min: 0, max: 2e12, noNaN: true }), fc.oneof(fc.double(), fc.constantFrom(NaN, Infinity, -1, '5'))),
      y: mostly(
        fc.integer({ min: 1, max: 40 }).map((k) => new Uint8Array(16 * k)),
        fc.oneof(fc.uint8Array({ maxLength: 70 }), fc.constantFrom(new Uint8Array(16 * (MAX_MEASUREMENTS + 1)), [1, 2], 'bytes')),
      ),
      sigma: mostly(fc.double({ min: 0, max: 10, noNaN: true }), fc.oneof(fc.double(), fc.constantFrom(null, -0.5, NaN))),
      extra: fc.constantFrom(1, null),
    },
    { requiredKeys: ['v', 'type', 'stream', 'seq', 'time', 'y'] },
  );

  it('accepts only what frameSchema accepts', () => {
    let fastAccepted = 0;
    fc.assert(
      fc.property(nearFrame, (frame) => {
        const fast = isWellFormedFrame(frame as Record<string, unknown>);
        if (fast) fastAccepted++;
        if (fast) expect(frameSchema.safeParse(frame).success).toBe(true);
      }),
      { numRuns: 20_000 },
    );
    // The generator must reach the accepting side too, or the property says nothing.
    expect(fastAccepted).toBeGreaterThan(100);
  });

  it('accepts every valid frame example, and decode still names the problem of a bad one', () => {
    for (const msg of EXAMPLES.frame) expect(isWellFormedFrame(msg as unknown as Record<string, unknown>)).toBe(true);
    const bad = rejection(raw({ v: 1, type: 'frame', stream: 'plant.a', seq: 1, time: 0, y: new Uint8Array(17) }));
    expect(bad.field).toBe('y');
  });
});
