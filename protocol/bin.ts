import { ProtocolError } from './errors.js';

/**
 * Numeric arrays travel as MessagePack `bin` holding little-endian bytes: Float64 for values
 * (complex vectors interleaved re, im) and Uint32 for indices. A decoded `bin` is a view into the
 * socket's read chunk at an arbitrary byte offset, so readers copy it out into an aligned array
 * (which also lets the chunk be freed).
 */

const LITTLE_ENDIAN_HOST = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/** A sparse complex vector on the wire: which entries, and their values. */
export interface WireSparse {
  /** Uint32 LE, 4 bytes per entry. */
  indices: Uint8Array;
  /** Float64 LE interleaved complex, 16 bytes per entry. */
  values: Uint8Array;
}

/** The same sparse vector, decoded into aligned typed arrays. */
export interface SparseVector {
  indices: Uint32Array;
  /** Interleaved complex, length 2·indices.length. */
  values: Float64Array;
}

function littleEndianBytes(a: Float64Array | Uint32Array): Uint8Array {
  const view = new Uint8Array(a.buffer, a.byteOffset, a.byteLength);
  if (LITTLE_ENDIAN_HOST) return view;
  // Big-endian host: reverse each element's bytes into a fresh buffer.
  const size = a.BYTES_PER_ELEMENT;
  const out = new Uint8Array(a.byteLength);
  for (let i = 0; i < out.length; i += size) {
    for (let b = 0; b < size; b++) out[i + b] = view[i + size - 1 - b]!;
  }
  return out;
}

/**
 * Float64 values as wire bytes. On little-endian hosts this is a view of the same memory (no
 * copy): do not change the array until the message has been encoded.
 */
export function float64ToBin(values: Float64Array): Uint8Array {
  return littleEndianBytes(values);
}

/** Uint32 values as wire bytes (a view on little-endian hosts, see float64ToBin). */
export function uint32ToBin(values: Uint32Array): Uint8Array {
  return littleEndianBytes(values);
}

function checkLength(bin: Uint8Array, unit: number, field: string): number {
  if (bin.byteLength % unit !== 0) {
    throw new ProtocolError('invalid_field', `${bin.byteLength} bytes is not a multiple of ${unit}`, field);
  }
  return bin.byteLength / unit;
}

/**
 * Copies little-endian Float64 bytes into an aligned Float64Array. Pass `out` to reuse a buffer
 * (it must hold exactly byteLength / 8 values).
 */
export function binToFloat64(bin: Uint8Array, field = 'bin', out?: Float64Array): Float64Array {
  const count = checkLength(bin, 8, field);
  const target = out ?? new Float64Array(count);
  if (target.length !== count) {
    throw new ProtocolError('invalid_field', `expected ${target.length * 8} bytes, got ${bin.byteLength}`, field);
  }
  if (LITTLE_ENDIAN_HOST) {
    new Uint8Array(target.buffer, target.byteOffset, target.byteLength).set(bin);
  } else {
    const view = new DataView(bin.buffer, bin.byteOffset, bin.byteLength);
    for (let i = 0; i < count; i++) target[i] = view.getFloat64(i * 8, true);
  }
  return target;
}

/** Copies little-endian Uint32 bytes into an aligned Uint32Array. */
export function binToUint32(bin: Uint8Array, field = 'bin'): Uint32Array {
  const count = checkLength(bin, 4, field);
  const target = new Uint32Array(count);
  if (LITTLE_ENDIAN_HOST) {
    new Uint8Array(target.buffer).set(bin);
  } else {
    const view = new DataView(bin.buffer, bin.byteOffset, bin.byteLength);
    for (let i = 0; i < count; i++) target[i] = view.getUint32(i * 4, true);
  }
  return target;
}

/** Number of complex entries in a bin of interleaved Float64 pairs (16 bytes each). */
export function complexCount(bin: Uint8Array, field = 'bin'): number {
  return checkLength(bin, 16, field);
}

export function sparseToWire(sparse: SparseVector): WireSparse {
  return { indices: uint32ToBin(sparse.indices), values: float64ToBin(sparse.values) };
}

export function sparseFromWire(wire: WireSparse, field = 'coefficients'): SparseVector {
  const indices = binToUint32(wire.indices, `${field}.indices`);
  const values = binToFloat64(wire.values, `${field}.values`);
  if (values.length !== 2 * indices.length) {
    throw new ProtocolError('invalid_field', `${indices.length} indices but ${values.length / 2} complex values`, `${field}.values`);
  }
  return { indices, values };
}
