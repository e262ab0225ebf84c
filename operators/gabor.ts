/**
 * Time-frequency (Gabor) operator of a window g of length n on a delay-Doppler grid.
 *
 * Column j = k·L + (l − dopplerFrom), delay k = 0..K−1, Doppler bin l = dopplerFrom..dopplerTo
 * (L = dopplerTo − dopplerFrom + 1 ≤ n; a negative l is the bin l mod n), is the
 * time-frequency shift
 *   a_j[t] = e^{2πi l t / n} · g[(t − k) mod n],   t = 0..n−1.
 * The full grid is K = n, dopplerFrom = 0, dopplerTo = n − 1 (n² columns).
 *
 * Matrix-free through FFTs, K transforms of length n per call, never a dense n × K·L matrix:
 *   apply:   (A c)[t] = Σ_k g[t − k] · h_k[t],  h_k[t] = Σ_l c[k, l] e^{+2πi l t/n}
 *            (h_k is an unnormalised inverse DFT: FFT of c[k, ·] scattered to bins (−l) mod n)
 *   adjoint: (Aᴴ y)[k, l] = Σ_t e^{−2πi l t/n} conj(g[t − k]) y[t] = FFT(conj(g[· − k]) ⊙ y)[l mod n]
 *
 * Norm: on the full grid A Aᴴ = n‖g‖²·I (the columns form a tight frame), so ‖A‖ = √n·‖g‖.
 * A sub-grid keeps a subset of the columns, so ‖A_sub‖ ≤ √n·‖g‖; two more bounds can be
 * tighter: each delay block B_k = diag(g[· − k])·(Doppler exponentials) has ‖B_k‖ ≤
 * max|g|·√n, so ‖A_sub‖² ≤ K·n·max|g|²; and ‖A_sub‖² ≤ ‖A_sub‖_F² = K·L·‖g‖².
 */
import { fftPlan, type FftPlan } from './fft.js';
import type { LinearOperator } from './types.js';

export interface DelayDopplerGrid {
  /** K: delays 0..K−1 (1 ≤ K ≤ n). */
  delays: number;
  /** First Doppler bin (may be negative, > −n). */
  dopplerFrom: number;
  /** Last Doppler bin (< n); dopplerTo − dopplerFrom + 1 ≤ n. */
  dopplerTo: number;
}

export function fullGrid(n: number): DelayDopplerGrid {
  return { delays: n, dopplerFrom: 0, dopplerTo: n - 1 };
}

export class GaborOperator implements LinearOperator {
  readonly rows: number;
  readonly cols: number;
  readonly normBound: number;
  readonly real = false;
  /** L: Doppler bins per delay. */
  readonly dopplerBins: number;
  private readonly plan: FftPlan;
  /** Bin (l mod n) of Doppler offset i = l − dopplerFrom, and its negation (−l) mod n. */
  private readonly bins: Int32Array;
  private readonly negatedBins: Int32Array;
  /** Apply's FFT input: zero outside the grid's bins for the operator's lifetime. */
  private readonly scattered: Float64Array;
  /** Adjoint's FFT input. */
  private readonly product: Float64Array;
  private readonly transformed: Float64Array;

  /** `window` is interleaved complex of length 2n, used as given (normalise it beforehand). */
  constructor(
    readonly size: number,
    readonly window: Float64Array,
    readonly grid: DelayDopplerGrid = fullGrid(size),
  ) {
    const n = size;
    const L = grid.dopplerTo - grid.dopplerFrom + 1;
    if (window.length !== 2 * n) throw new RangeError(`Gabor window has ${window.length / 2} entries, expected ${n}`);
    if (grid.delays < 1 || grid.delays > n || L < 1 || L > n || grid.dopplerFrom <= -n || grid.dopplerTo >= n) {
      throw new RangeError(`Gabor grid ${JSON.stringify(grid)} does not fit n = ${n}`);
    }
    this.rows = n;
    this.dopplerBins = L;
    this.cols = grid.delays * L;
    this.plan = fftPlan(n);
    this.bins = new Int32Array(L);
    this.negatedBins = new Int32Array(L);
    for (let i = 0; i < L; i++) {
      const bin = (((grid.dopplerFrom + i) % n) + n) % n;
      this.bins[i] = bin;
      this.negatedBins[i] = (n - bin) % n;
    }
    this.scattered = new Float64Array(2 * n);
    this.product = new Float64Array(2 * n);
    this.transformed = new Float64Array(2 * n);

    let energy = 0;
    let peak = 0;
    for (let t = 0; t < n; t++) {
      const p = window[2 * t]! ** 2 + window[2 * t + 1]! ** 2;
      energy += p;
      peak = Math.max(peak, p);
    }
    this.normBound = Math.sqrt(Math.min(n * energy, grid.delays * n * peak, this.cols * energy));
  }

  apply(c: Float64Array, out: Float64Array): void {
    const n = this.size;
    const L = this.dopplerBins;
    const { negatedBins, scattered: z, transformed: h, window: g } = this;
    out.fill(0, 0, 2 * n);
    for (let k = 0; k < this.grid.delays; k++) {
      const base = 2 * k * L;
      for (let i = 0; i < L; i++) {
        const b = 2 * negatedBins[i]!;
        z[b] = c[base + 2 * i]!;
        z[b + 1] = c[base + 2 * i + 1]!;
      }
      this.plan.forward(z, h);
      // out[t] += g[(t − k) mod n] · h[t], split at t = k to avoid a modulo per sample.
      accumulateProduct(g, 2 * (n - k), h, out, 0, k);
      accumulateProduct(g, -2 * k, h, out, k, n);
    }
  }

  adjoint(y: Float64Array, out: Float64Array): void {
    const n = this.size;
    const L = this.dopplerBins;
    const { bins, product: z, transformed: spectrum, window: g } = this;
    for (let k = 0; k < this.grid.delays; k++) {
      // z[t] = conj(g[(t − k) mod n]) · y[t]
      conjugateProduct(g, 2 * (n - k), y, z, 0, k);
      conjugateProduct(g, -2 * k, y, z, k, n);
      this.plan.forward(z, spectrum);
      const base = 2 * k * L;
      for (let i = 0; i < L; i++) {
        const b = 2 * bins[i]!;
        out[base + 2 * i] = spectrum[b]!;
        out[base + 2 * i + 1] = spectrum[b + 1]!;
      }
    }
  }
}

/** out[t] += g[gOffset/2 + t] · h[t] for t in [from, to) (interleaved complex). */
function accumulateProduct(
  g: Float64Array,
  gOffset: number,
  h: Float64Array,
  out: Float64Array,
  from: number,
  to: number,
): void {
  for (let i = 2 * from; i < 2 * to; i += 2) {
    const gr = g[gOffset + i]!;
    const gi = g[gOffset + i + 1]!;
    const hr = h[i]!;
    const hi = h[i + 1]!;
    out[i] += gr * hr - gi * hi;
    out[i + 1] += gr * hi + gi * hr;
  }
}

/** z[t] = conj(g[gOffset/2 + t]) · y[t] for t in [from, to) (interleaved complex). */
function conjugateProduct(
  g: Float64Array,
  gOffset: number,
  y: Float64Array,
  z: Float64Array,
  from: number,
  to: number,
): void {
  for (let i = 2 * from; i < 2 * to; i += 2) {
    const gr = g[gOffset + i]!;
    const gi = g[gOffset + i + 1]!;
    const yr = y[i]!;
    const yi = y[i + 1]!;
    z[i] = gr * yr + gi * yi;
    z[i + 1] = gr * yi - gi * yr;
  }
}
