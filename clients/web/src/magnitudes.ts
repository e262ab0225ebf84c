/**
 * Magnitudes of a sparse complex vector laid out densely: out[j] = |c_j| for the listed
 * indices, 0 elsewhere. `values` is interleaved complex, one pair per index; indices beyond
 * `out` are ignored (a declaration and its results disagreeing must not break the page).
 */
export function fillMagnitudes(indices: Uint32Array, values: Float64Array, out: Float64Array): void {
  out.fill(0);
  for (let i = 0; i < indices.length; i++) {
    const j = indices[i]!;
    if (j >= out.length) continue;
    out[j] = Math.hypot(values[2 * i]!, values[2 * i + 1]!);
  }
}

/** Real and imaginary parts of an interleaved complex vector, into caller-owned arrays. */
export function splitComplex(z: Float64Array, re: Float64Array, im: Float64Array): void {
  const n = Math.min(z.length >> 1, re.length, im.length);
  for (let i = 0; i < n; i++) {
    re[i] = z[2 * i]!;
    im[i] = z[2 * i + 1]!;
  }
}
