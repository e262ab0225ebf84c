/** Small allocation-free helpers over interleaved complex Float64Arrays. */

/** dst[0..count) ← src[0..count) without creating views (subarray allocates). */
export function copyPrefix(src: Float64Array, dst: Float64Array, count: number): void {
  for (let i = 0; i < count; i++) dst[i] = src[i]!;
}
