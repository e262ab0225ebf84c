import { describe, expect, it } from 'vitest';
import { decode, encode } from '../codec.js';
import type { Message } from '../messages.js';

/**
 * A minimal MessagePack encoder written from the MessagePack specification
 * (github.com/msgpack/msgpack, spec.md), making the same format choices as msgpack-python's
 * `packb` with its defaults (use_bin_type=True): fixmap/map16, fixarray/array16, fixstr/str8/str16,
 * the smallest integer format, float64 for floats, bin8/16/32 for bytes, nil for None.
 * It is independent of msgpackr, so it checks that our codec reads what another encoder writes.
 */
function specEncode(value: unknown, out: number[] = []): number[] {
  const u16 = (n: number) => out.push((n >> 8) & 0xff, n & 0xff);
  const u32 = (n: number) => out.push((n >>> 24) & 0xff, (n >>> 16) & 0xff, (n >>> 8) & 0xff, n & 0xff);
  if (value === null) out.push(0xc0);
  else if (value === true) out.push(0xc3);
  else if (value === false) out.push(0xc2);
  else if (typeof value === 'number' && Number.isInteger(value) && !Object.is(value, -0)) {
    if (value >= 0 && value <= 0x7f) out.push(value);
    else if (value < 0 && value >= -32) out.push(value & 0xff);
    else if (value >= 0 && value <= 0xff) out.push(0xcc, value);
    else if (value >= 0 && value <= 0xffff) (out.push(0xcd), u16(value));
    else if (value >= 0 && value <= 0xffffffff) (out.push(0xce), u32(value));
    else if (value > 0) (out.push(0xcf), u32(Math.floor(value / 2 ** 32)), u32(value % 2 ** 32));
    else throw new Error('negative ints beyond fixint are not needed here');
  } else if (typeof value === 'number') {
    const b = new DataView(new ArrayBuffer(8));
    b.setFloat64(0, value, false); // big-endian, as the specification requires
    out.push(0xcb, ...new Uint8Array(b.buffer));
  } else if (typeof value === 'string') {
    const bytes = Buffer.from(value, 'utf8');
    if (bytes.length < 32) out.push(0xa0 | bytes.length);
    else if (bytes.length <= 0xff) out.push(0xd9, bytes.length);
    else (out.push(0xda), u16(bytes.length));
    out.push(...bytes);
  } else if (value instanceof Uint8Array) {
    if (value.length <= 0xff) out.push(0xc4, value.length);
    else if (value.length <= 0xffff) (out.push(0xc5), u16(value.length));
    else (out.push(0xc6), u32(value.length));
    for (const byte of value) out.push(byte);
  } else if (Array.isArray(value)) {
    if (value.length < 16) out.push(0x90 | value.length);
    else (out.push(0xdc), u16(value.length));
    for (const item of value) specEncode(item, out);
  } else if (typeof value === 'object') {
    const entries = Object.entries(value as Record<string, unknown>).filter(([, v]) => v !== undefined);
    if (entries.length < 16) out.push(0x80 | entries.length);
    else (out.push(0xde), u16(entries.length));
    for (const [k, v] of entries) (specEncode(k, out), specEncode(v, out));
  } else throw new Error(`cannot encode ${typeof value}`);
  return out;
}

/** struct.pack('<%dd', *values) in Python: little-endian float64s. */
function pythonStructPack(values: number[]): Uint8Array {
  const view = new DataView(new ArrayBuffer(values.length * 8));
  values.forEach((v, i) => view.setFloat64(i * 8, v, true));
  return new Uint8Array(view.buffer);
}

/** The messages of the example producer in docs/protocol.md (indices invented here). */
const indices = Array.from({ length: 64 }, (_, i) => i * 4 + (i % 3));
const declare = {
  v: 1,
  type: 'declare',
  ref: 'd1',
  stream: {
    name: 'example.tones',
    operator: { kind: 'sampling', n: 256, samples: { law: 'explicit', indices }, basis: { kind: 'dft' } },
    solver: { method: 'lasso' },
    noise_sigma: 0.01,
    alerts: [{ metric: 'relative_residual', above: 0.2, clear_below: 0.1, k: 3, of: 5 }],
  },
};
const y = Array.from({ length: 128 }, (_, i) => Math.sin(i) * 1.5);
const frame = { v: 1, type: 'frame', stream: 'example.tones', seq: 70_000, time: 1_767_225_600_123.25, y: pythonStructPack(y) };

describe('messages written by another MessagePack encoder', () => {
  it('reads the example producer’s declare exactly as our own encoding of it', () => {
    const foreign = Uint8Array.from(specEncode(declare));
    const ours = decode(encode(declare as Message));
    expect(decode(foreign)).toEqual(ours);
    // The foreign bytes start with a fixmap of 4 entries ("v", "type", "ref", "stream").
    expect(foreign[0]).toBe(0x84);
  });

  it('reads the example producer’s frame, uint32 seq and float64 time included', () => {
    const foreign = Uint8Array.from(specEncode(frame));
    expect(foreign.includes(0xce)).toBe(true); // seq 70000 needs uint32 (0xce) in the spec's smallest-width rule
    const msg = decode(foreign);
    if (msg.type !== 'frame') throw new Error('not a frame');
    expect(msg.seq).toBe(70_000);
    expect(msg.time).toBe(1_767_225_600_123.25);
    const values = new DataView(msg.y.buffer, msg.y.byteOffset, msg.y.byteLength);
    for (let i = 0; i < y.length; i++) expect(values.getFloat64(i * 8, true)).toBe(y[i]);
    // Our encoder writes the same y bytes (plain bin, little-endian).
    const ours = decode(encode(frame as Message));
    expect(Buffer.from((ours as typeof msg).y).equals(Buffer.from(msg.y))).toBe(true);
  });

  it('reads a declared reply with next_seq nil, as Python None', () => {
    const bytes = Uint8Array.from(specEncode({ v: 1, type: 'declared', ref: 'd1', stream: 'x', credits: 8, next_seq: null }));
    expect(decode(bytes)).toMatchObject({ type: 'declared', next_seq: null, credits: 8 });
  });
});
