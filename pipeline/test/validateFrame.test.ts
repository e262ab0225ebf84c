import { describe, expect, it } from 'vitest';
import { checkFrameData } from '../validateFrame.js';

// Checks against the wire format (Float64 little-endian, re/im interleaved: docs/protocol.md).
function bytesOf(values: number[], offset = 3): Uint8Array {
  // An unaligned view, as a decoded MessagePack bin is.
  const buf = new Uint8Array(offset + values.length * 8);
  const view = new DataView(buf.buffer);
  values.forEach((v, i) => view.setFloat64(offset + 8 * i, v, true));
  return buf.subarray(offset);
}

describe('checkFrameData', () => {
  it('copies an unaligned little-endian view into an aligned array that owns its buffer', () => {
    const check = checkFrameData(bytesOf([1.5, -2, 3.25, 0]), 2, undefined);
    expect(check.ok).toBe(true);
    if (!check.ok) return;
    expect([...check.y]).toEqual([1.5, -2, 3.25, 0]);
    expect(check.y.byteOffset).toBe(0);
    expect(check.y.buffer.byteLength).toBe(32);
  });

  it('names a wrong length with both byte counts', () => {
    const check = checkFrameData(bytesOf([1, 2]), 2, undefined);
    expect(check).toMatchObject({ ok: false, reason: 'wrong_length', field: 'y' });
    if (!check.ok) expect(check.detail).toContain('16 bytes');
  });

  it('names the first non-finite measurement and its part', () => {
    const check = checkFrameData(bytesOf([1, 2, 3, Number.NaN]), 2, undefined);
    expect(check).toMatchObject({ ok: false, reason: 'not_finite', field: 'y' });
    if (!check.ok) expect(check.detail).toContain('measurement 1 (imaginary part)');
  });

  it('refuses a negative or non-finite noise level', () => {
    expect(checkFrameData(bytesOf([1, 2]), 1, -1)).toMatchObject({ ok: false, reason: 'bad_sigma', field: 'sigma' });
    expect(checkFrameData(bytesOf([1, 2]), 1, Number.POSITIVE_INFINITY)).toMatchObject({ ok: false, reason: 'bad_sigma' });
  });
});
