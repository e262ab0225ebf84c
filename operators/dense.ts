/**
 * Dense m × n operator stored row-major: entry (i, j) at index i·n + j of `re` (and `im`
 * for complex matrices; null means real). Used for seeded Gaussian/Bernoulli matrices
 * and for matrices given explicitly.
 */
import { spectralNormBound } from './norm-bound.js';
import type { LinearOperator } from './types.js';

export class DenseOperator implements LinearOperator {
  readonly normBound: number;
  readonly real: boolean;

  constructor(
    readonly rows: number,
    readonly cols: number,
    readonly re: Float64Array,
    readonly im: Float64Array | null,
  ) {
    if (re.length !== rows * cols || (im !== null && im.length !== rows * cols)) {
      throw new RangeError(`dense matrix data must have rows·cols = ${rows * cols} entries`);
    }
    this.real = im === null;
    this.normBound = spectralNormBound(rows, cols, re, im);
  }

  apply(x: Float64Array, out: Float64Array): void {
    const { rows, cols, re, im } = this;
    for (let i = 0; i < rows; i++) {
      const row = i * cols;
      let sr = 0;
      let si = 0;
      if (im === null) {
        for (let j = 0; j < cols; j++) {
          const a = re[row + j]!;
          sr += a * x[2 * j]!;
          si += a * x[2 * j + 1]!;
        }
      } else {
        for (let j = 0; j < cols; j++) {
          const ar = re[row + j]!;
          const ai = im[row + j]!;
          const xr = x[2 * j]!;
          const xi = x[2 * j + 1]!;
          sr += ar * xr - ai * xi;
          si += ar * xi + ai * xr;
        }
      }
      out[2 * i] = sr;
      out[2 * i + 1] = si;
    }
  }

  adjoint(y: Float64Array, out: Float64Array): void {
    const { rows, cols, re, im } = this;
    out.fill(0, 0, 2 * cols);
    for (let i = 0; i < rows; i++) {
      const row = i * cols;
      const yr = y[2 * i]!;
      const yi = y[2 * i + 1]!;
      if (im === null) {
        for (let j = 0; j < cols; j++) {
          const a = re[row + j]!;
          out[2 * j] += a * yr;
          out[2 * j + 1] += a * yi;
        }
      } else {
        // conj(a) · y
        for (let j = 0; j < cols; j++) {
          const ar = re[row + j]!;
          const ai = im[row + j]!;
          out[2 * j] += ar * yr + ai * yi;
          out[2 * j + 1] += ar * yi - ai * yr;
        }
      }
    }
  }
}
