import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { binToFloat64, binToUint32, complexCount, float64ToBin, sparseFromWire, sparseToWire, uint32ToBin } from '../bin.js';
import { ProtocolError } from '../errors.js';

describe('little-endian bin helpers', () => {
  it('lays out Float64 and Uint32 as little-endian bytes', () => {
    // IEEE 754 binary64: 1.0 = 0x3FF0000000000000, -2.5 = 0xC004000000000000 (from the format's definition).
    expect(Buffer.from(float64ToBin(new Float64Array([1, -2.5]))).toString('hex')).toBe('000000000000f03f00000000000004c0');
    expect(Buffer.from(uint32ToBin(new Uint32Array([0x01020304, 7]))).toString('hex')).toBe('0403020107000000');
  });

  it('copies out of unaligned views', () => {
    const values = new Float64Array([Math.PI, -0, Number.MIN_VALUE, -1e308, Infinity]);
    const chunk = new Uint8Array(3 + values.byteLength);
    chunk.set(float64ToBin(values), 3);
    const view = chunk.subarray(3);
    expect(view.byteOffset % 8).not.toBe(0);
    const back = binToFloat64(view);
    expect(Array.from(back)).toEqual(Array.from(values));
    // A copy: changing the chunk leaves the decoded values alone.
    chunk.fill(0);
    expect(back[0]).toBe(Math.PI);
    const reused = new Float64Array(values.length);
    expect(binToFloat64(float64ToBin(values), 'y', reused)).toBe(reused);
  });

  it('round-trips arbitrary doubles bit for bit, including NaN payloads', () => {
    fc.assert(
      fc.property(fc.float64Array({ maxLength: 64 }), fc.nat(7), (values, offset) => {
        const chunk = new Uint8Array(offset + values.byteLength);
        chunk.set(float64ToBin(values), offset);
        const back = binToFloat64(chunk.subarray(offset));
        expect(Buffer.from(back.buffer).equals(Buffer.from(values.buffer, values.byteOffset, values.byteLength))).toBe(true);
      }),
    );
  });

  it('rejects lengths that are not whole elements, naming the field', () => {
    expect(() => binToFloat64(new Uint8Array(12), 'y')).toThrow(/y: 12 bytes is not a multiple of 8/);
    expect(() => binToUint32(new Uint8Array(6), 'top_k.indices')).toThrow(ProtocolError);
    expect(() => complexCount(new Uint8Array(24), 'y')).toThrow(/multiple of 16/);
    expect(complexCount(new Uint8Array(48))).toBe(3);
    expect(() => binToFloat64(new Uint8Array(16), 'y', new Float64Array(3))).toThrow(/expected 24 bytes/);
  });

  it('sparse vectors survive the trip and mismatched halves are rejected', () => {
    const sparse = { indices: new Uint32Array([2, 9, 4000000000]), values: new Float64Array([1, 2, 3, 4, 5, 6]) };
    const back = sparseFromWire(sparseToWire(sparse));
    expect(Array.from(back.indices)).toEqual([2, 9, 4000000000]);
    expect(Array.from(back.values)).toEqual([1, 2, 3, 4, 5, 6]);
    expect(() => sparseFromWire({ indices: new Uint8Array(8), values: new Uint8Array(16) }, 'top_k')).toThrow(/top_k.values/);
  });
});
