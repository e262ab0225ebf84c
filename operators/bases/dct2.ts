import { fftPlan, type FftPlan } from '../fft.js';
import type { UnitaryBasis } from '../types.js';

/**
 * Orthonormal DCT-II basis: analysis c[k] = s_k Σ_t x[t] cos(π(2t+1)k / 2n), s_0 = √(1/n),
 * s_k = √(2/n); synthesis is its transpose (the orthonormal DCT-III). Real, applied to the
 * real and imaginary parts of a complex vector alike.
 *
 * One complex FFT of length n per call (Makhoul, "A fast cosine transform in one and two
 * dimensions", IEEE Trans. ASSP 28(1), 1980): with v the even samples followed by the odd
 * ones reversed, Σ_t x[t] cos(π(2t+1)k/2n) = Re(e^{−πik/2n} V[k]), V = DFT(v). For complex x
 * the DFTs of the real and imaginary parts are split out of one complex DFT by conjugate
 * symmetry (V[k] ± conj(V[n−k])). Synthesis runs the transposed steps.
 */
export class Dct2Basis implements UnitaryBasis {
  readonly real = true;
  private readonly plan: FftPlan;
  /** s_k cos(πk/2n) / 2 and s_k sin(πk/2n) / 2. */
  private readonly alpha: Float64Array;
  private readonly beta: Float64Array;
  /** cos(πk/2n), sin(πk/2n) and s_k for synthesis. */
  private readonly cosT: Float64Array;
  private readonly sinT: Float64Array;
  private readonly s: Float64Array;
  private readonly v: Float64Array;
  private readonly spec: Float64Array;

  constructor(readonly size: number) {
    const n = size;
    this.plan = fftPlan(n);
    this.alpha = new Float64Array(n);
    this.beta = new Float64Array(n);
    this.cosT = new Float64Array(n);
    this.sinT = new Float64Array(n);
    this.s = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      const angle = (Math.PI * k) / (2 * n);
      const sk = Math.sqrt((k === 0 ? 1 : 2) / n);
      this.cosT[k] = Math.cos(angle);
      this.sinT[k] = Math.sin(angle);
      this.s[k] = sk;
      this.alpha[k] = (sk * this.cosT[k]!) / 2;
      this.beta[k] = (sk * this.sinT[k]!) / 2;
    }
    this.v = new Float64Array(2 * n);
    this.spec = new Float64Array(2 * n);
  }

  analyze(x: Float64Array, out: Float64Array): void {
    const n = this.size;
    const { v, spec: V, alpha, beta } = this;
    // v[m] = x[2m], v[n−1−m] = x[2m+1]
    for (let t = 0; t < n; t++) {
      const m = t % 2 === 0 ? t >> 1 : n - 1 - (t >> 1);
      v[2 * m] = x[2 * t]!;
      v[2 * m + 1] = x[2 * t + 1]!;
    }
    this.plan.forward(v, V);
    for (let k = 0; k < n; k++) {
      const kk = k === 0 ? 0 : n - k;
      const pr = V[2 * k]!;
      const pi = V[2 * k + 1]!;
      const qr = V[2 * kk]!;
      const qi = V[2 * kk + 1]!;
      const a = alpha[k]!;
      const b = beta[k]!;
      out[2 * k] = a * (pr + qr) + b * (pi - qi);
      out[2 * k + 1] = a * (pi + qi) - b * (pr - qr);
    }
  }

  synthesize(c: Float64Array, out: Float64Array): void {
    const n = this.size;
    const { v, spec: U, cosT, sinT, s } = this;
    // U = sym(conj(D)·(s⊙Re c)) + i·sym(conj(D)·(s⊙Im c)), sym(u)_k = (u_k + conj(u_{−k}))/2.
    for (let k = 0; k < n; k++) {
      const kk = k === 0 ? 0 : n - k;
      const ar = s[k]! * c[2 * k]!;
      const ai = s[k]! * c[2 * k + 1]!;
      const br = s[kk]! * c[2 * kk]!;
      const bi = s[kk]! * c[2 * kk + 1]!;
      const ck = cosT[k]!;
      const sk = sinT[k]!;
      const ckk = cosT[kk]!;
      const skk = sinT[kk]!;
      // Stored at (−k) mod n so that a forward FFT computes the unnormalised inverse F^H U.
      U[2 * kk] = (ck * ar + ckk * br - (sk * ai - skk * bi)) / 2;
      U[2 * kk + 1] = (sk * ar - skk * br + (ck * ai + ckk * bi)) / 2;
    }
    this.plan.forward(U, v);
    for (let t = 0; t < n; t++) {
      const m = t % 2 === 0 ? t >> 1 : n - 1 - (t >> 1);
      out[2 * t] = v[2 * m]!;
      out[2 * t + 1] = v[2 * m + 1]!;
    }
  }
}
