/**
 * The validate stage: a frame's measurements must have exactly the declared length and be finite
 * numbers, and its noise level (if any) a finite non-negative number. Nothing that fails reaches a
 * solver. On success the measurements are copied out of the socket's buffer into a fresh, aligned
 * Float64Array that owns its ArrayBuffer (so it can be transferred to a worker).
 */

export type FrameCheck =
  | { ok: true; y: Float64Array }
  | { ok: false; reason: 'wrong_length' | 'not_finite' | 'bad_sigma'; field: string; detail: string };

const LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

export function checkFrameData(yBytes: Uint8Array, rows: number, sigma: number | undefined): FrameCheck {
  const expectedBytes = 16 * rows;
  if (yBytes.byteLength !== expectedBytes) {
    return {
      ok: false,
      reason: 'wrong_length',
      field: 'y',
      detail: `y has ${yBytes.byteLength} bytes; this stream takes ${rows} complex measurements = ${expectedBytes} bytes (Float64 LE, re/im interleaved)`,
    };
  }
  if (sigma !== undefined && !(Number.isFinite(sigma) && sigma >= 0)) {
    return { ok: false, reason: 'bad_sigma', field: 'sigma', detail: `sigma must be a finite number >= 0, got ${sigma}` };
  }
  const y = new Float64Array(2 * rows);
  if (LITTLE_ENDIAN) {
    new Uint8Array(y.buffer).set(yBytes);
  } else {
    const view = new DataView(yBytes.buffer, yBytes.byteOffset, yBytes.byteLength);
    for (let i = 0; i < y.length; i++) y[i] = view.getFloat64(8 * i, true);
  }
  for (let i = 0; i < y.length; i++) {
    if (!Number.isFinite(y[i]!)) {
      return {
        ok: false,
        reason: 'not_finite',
        field: 'y',
        detail: `y holds ${y[i]} at measurement ${i >> 1} (${i % 2 === 0 ? 'real' : 'imaginary'} part); measurements must be finite`,
      };
    }
  }
  return { ok: true, y };
}
