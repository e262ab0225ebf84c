/**
 * Row-subsampled unitary operators: the rows Ω = (ω_0, …, ω_{m−1}) of an n × n unitary
 * matrix. Row i of the operator is row ω_i of the matrix, so measurement i belongs to
 * index ω_i. Both have spectral norm exactly 1 (orthonormal rows).
 */
import { fftPlan, type FftPlan } from './fft.js';
import type { LinearOperator } from './types.js';

/** Rows Ω of the identity: time samples x[ω_i]. Real. */
export class RowSamplingOperator implements LinearOperator {
  readonly rows: number;
  readonly normBound = 1;
  readonly real = true;

  constructor(
    readonly cols: number,
    readonly indices: Int32Array,
  ) {
    this.rows = indices.length;
  }

  apply(x: Float64Array, out: Float64Array): void {
    const idx = this.indices;
    for (let i = 0; i < idx.length; i++) {
      const t = 2 * idx[i]!;
      out[2 * i] = x[t]!;
      out[2 * i + 1] = x[t + 1]!;
    }
  }

  adjoint(y: Float64Array, out: Float64Array): void {
    const idx = this.indices;
    out.fill(0, 0, 2 * this.cols);
    for (let i = 0; i < idx.length; i++) {
      const t = 2 * idx[i]!;
      out[t] = y[2 * i]!;
      out[t + 1] = y[2 * i + 1]!;
    }
  }
}

/**
 * Rows Ω of the unitary DFT matrix F (F[k,t] = n^{−1/2} e^{−2πi kt/n}; frequency samples of x),
 * or rows Ω of F^H (time samples of the signal whose unitary spectrum is x). One FFT per call:
 *
 *   rows of F:    A x = s·FFT(x)[ω_i],          Aᴴ y = s·FFT(z), z[(−ω_i) mod n] = y_i
 *   rows of F^H:  A x = s·FFT(x)[(−ω_i) mod n], Aᴴ y = s·FFT(z), z[ω_i] = y_i
 *
 * with s = n^{−1/2}, using Σ_k x_k e^{+2πi kt/n} = FFT(x)[(−t) mod n]. The scatter buffer z
 * is zero outside the m scattered positions for the operator's lifetime, so the adjoint
 * writes m entries and runs one FFT: no clearing pass.
 */
export class SubsampledDftOperator implements LinearOperator {
  readonly rows: number;
  readonly normBound = 1;
  readonly real = false;
  private readonly plan: FftPlan;
  private readonly scale: number;
  /** Spectrum positions read by apply. */
  private readonly gatherAt: Int32Array;
  /** Positions of z written by adjoint. */
  private readonly scatterAt: Int32Array;
  private readonly spectrum: Float64Array;
  private readonly scattered: Float64Array;

  /** `rowsOf` 'dft': rows of F (frequency samples); 'idft': rows of F^H (time samples). */
  constructor(
    readonly cols: number,
    readonly indices: Int32Array,
    readonly rowsOf: 'dft' | 'idft',
  ) {
    const n = cols;
    this.rows = indices.length;
    this.plan = fftPlan(n);
    this.scale = 1 / Math.sqrt(n);
    const negated = indices.map((w) => (n - w) % n);
    this.gatherAt = rowsOf === 'dft' ? indices : negated;
    this.scatterAt = rowsOf === 'dft' ? negated : indices;
    this.spectrum = new Float64Array(2 * n);
    this.scattered = new Float64Array(2 * n);
  }

  apply(x: Float64Array, out: Float64Array): void {
    const { gatherAt, spectrum, scale } = this;
    this.plan.forward(x, spectrum);
    for (let i = 0; i < gatherAt.length; i++) {
      const k = 2 * gatherAt[i]!;
      out[2 * i] = spectrum[k]! * scale;
      out[2 * i + 1] = spectrum[k + 1]! * scale;
    }
  }

  adjoint(y: Float64Array, out: Float64Array): void {
    const { scatterAt, scattered, scale } = this;
    for (let i = 0; i < scatterAt.length; i++) {
      const k = 2 * scatterAt[i]!;
      scattered[k] = y[2 * i]! * scale;
      scattered[k + 1] = y[2 * i + 1]! * scale;
    }
    this.plan.forward(scattered, out);
  }
}
