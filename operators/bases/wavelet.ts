import type { UnitaryBasis } from '../types.js';
import { copyPrefix } from '../vec.js';

/**
 * Orthonormal periodic wavelet bases (Mallat's pyramid with periodic boundaries).
 *
 * One analysis level maps x (length len, even) to approximations a and details d:
 *   a[i] = Σ_k h[k] · x[(2i + k) mod len],  d[i] = Σ_k g[k] · x[(2i + k) mod len],
 *   g[k] = (−1)^k · h[T − 1 − k],  i = 0..len/2 − 1,
 * and the level's output is [a, d]. Levels repeat on a. After L levels the coefficient
 * vector is [a_L, d_L, d_{L−1}, …, d_1] (lengths n/2^L, n/2^L, n/2^{L−1}, …, n/2).
 * Synthesis is the transpose (the filters are orthonormal, so it is the inverse).
 * Real filters: complex vectors are transformed lane by lane.
 */
export class PeriodicWaveletBasis implements UnitaryBasis {
  readonly real = true;
  private readonly g: Float64Array;
  private readonly tmp: Float64Array;

  constructor(
    readonly size: number,
    readonly levels: number,
    private readonly h: Float64Array,
  ) {
    if (levels < 1 || size % 2 ** levels !== 0) {
      throw new RangeError(`wavelet basis: size ${size} must be a multiple of 2^levels = 2^${levels}`);
    }
    const taps = h.length;
    this.g = new Float64Array(taps);
    for (let k = 0; k < taps; k++) this.g[k] = (k % 2 === 0 ? 1 : -1) * h[taps - 1 - k]!;
    this.tmp = new Float64Array(2 * size);
  }

  analyze(x: Float64Array, out: Float64Array): void {
    copyPrefix(x, out, 2 * this.size);
    for (let level = 1; level <= this.levels; level++) this.analysisStep(out, this.size >> (level - 1));
  }

  synthesize(c: Float64Array, out: Float64Array): void {
    copyPrefix(c, out, 2 * this.size);
    for (let level = this.levels; level >= 1; level--) this.synthesisStep(out, this.size >> (level - 1));
  }

  private analysisStep(work: Float64Array, len: number): void {
    const { h, g, tmp } = this;
    const half = len >> 1;
    const taps = h.length;
    for (let i = 0; i < half; i++) {
      let ar = 0;
      let ai = 0;
      let dr = 0;
      let di = 0;
      for (let k = 0; k < taps; k++) {
        const idx = (2 * i + k) % len;
        const xr = work[2 * idx]!;
        const xi = work[2 * idx + 1]!;
        ar += h[k]! * xr;
        ai += h[k]! * xi;
        dr += g[k]! * xr;
        di += g[k]! * xi;
      }
      tmp[2 * i] = ar;
      tmp[2 * i + 1] = ai;
      tmp[2 * (half + i)] = dr;
      tmp[2 * (half + i) + 1] = di;
    }
    copyPrefix(tmp, work, 2 * len);
  }

  private synthesisStep(work: Float64Array, len: number): void {
    const { h, g, tmp } = this;
    const half = len >> 1;
    const taps = h.length;
    tmp.fill(0, 0, 2 * len);
    for (let i = 0; i < half; i++) {
      const ar = work[2 * i]!;
      const ai = work[2 * i + 1]!;
      const dr = work[2 * (half + i)]!;
      const di = work[2 * (half + i) + 1]!;
      for (let k = 0; k < taps; k++) {
        const idx = (2 * i + k) % len;
        tmp[2 * idx] += h[k]! * ar + g[k]! * dr;
        tmp[2 * idx + 1] += h[k]! * ai + g[k]! * di;
      }
    }
    copyPrefix(tmp, work, 2 * len);
  }
}

/** Haar low-pass filter [1, 1]/√2 (Haar, Math. Ann. 69, 1910). */
export const HAAR_FILTER = new Float64Array([Math.SQRT1_2, Math.SQRT1_2]);

/**
 * Daubechies' 4-tap low-pass filter with two vanishing moments (Daubechies, "Orthonormal
 * bases of compactly supported wavelets", Comm. Pure Appl. Math. 41(7), 1988):
 * h = [1 + √3, 3 + √3, 3 − √3, 1 − √3] / (4√2).
 */
export const DB4_FILTER = (() => {
  const r3 = Math.sqrt(3);
  const d = 4 * Math.SQRT2;
  return new Float64Array([(1 + r3) / d, (3 + r3) / d, (3 - r3) / d, (1 - r3) / d]);
})();

/** Exponent of the largest power of two dividing n (n a positive integer). */
export function twoAdicValuation(n: number): number {
  let v = 0;
  while (n % 2 === 0 && n > 0) {
    n /= 2;
    v++;
  }
  return v;
}
