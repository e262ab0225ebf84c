import { fftPlan, type FftPlan } from '../fft.js';
import type { UnitaryBasis } from '../types.js';

/**
 * Unitary DFT basis: analysis c[k] = n^{−1/2} Σ_t x[t] e^{−2πi kt/n} (the spectrum),
 * synthesis x[t] = n^{−1/2} Σ_k c[k] e^{+2πi kt/n}. One FFT per call.
 */
export class DftBasis implements UnitaryBasis {
  readonly real = false;
  private readonly plan: FftPlan;
  private readonly scale: number;

  constructor(readonly size: number) {
    this.plan = fftPlan(size);
    this.scale = 1 / Math.sqrt(size);
  }
  synthesize(c: Float64Array, out: Float64Array): void {
    this.plan.inverse(c, out, this.scale);
  }
  analyze(x: Float64Array, out: Float64Array): void {
    this.plan.forward(x, out, this.scale);
  }
}
