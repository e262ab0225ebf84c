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
 *   apply:   (A c)[t] = Σ_k g[t − k] · h_k[t],  h_k[t] = Σ_l c[k, l] e^{+2πi l t/n} = H_k[(−t) mod n]
 *            with H_k the forward FFT of c[k, ·] placed at bins l mod n
 *   adjoint: (Aᴴ y)[k, l] = Σ_t e^{−2πi l t/n} conj(g[t − k]) y[t] = FFT(conj(g[· − k]) ⊙ y)[l mod n]
 * When the Doppler range covers all n bins (L = n, e.g. the full grid), the bins are a
 * rotation of 0..n−1 by dopplerFrom: the FFTs then read c[k, ·] and write (Aᴴ y)[k, ·] in
 * place, and the rotation becomes one modulation pass by e^{±2πi·dopplerFrom·t/n}.
 * Otherwise c[k, ·] is scattered into a buffer that is zero off the grid's bins.
 *
 * Norm: on the full grid A Aᴴ = n‖g‖²·I (the columns form a tight frame), so ‖A‖ = √n·‖g‖.
 * A sub-grid keeps a subset of the columns, so ‖A_sub‖ ≤ √n·‖g‖; two more bounds can be
 * tighter: each delay block B_k = diag(g[· − k])·(Doppler exponentials) has ‖B_k‖ ≤
 * max|g|·√n, so ‖A_sub‖² ≤ K·n·max|g|²; and ‖A_sub‖² ≤ ‖A_sub‖_F² = K·L·‖g‖².
 */
import { fftPlan, type FftPlan } from './fft.js';
import { BlockViews } from './block-views.js';
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
  /** L = n: transform blocks of the caller's vectors in place. */
  private readonly inPlace: boolean;
  private readonly blocks: BlockViews;
  /** e^{2πi·dopplerFrom·t/n} when the in-place path must rotate the bins, else null. */
  private readonly modulation: Float64Array | null;
  /** Bin l mod n of Doppler offset i = l − dopplerFrom. */
  private readonly bins: Int32Array;
  /** Scatter path: FFT inputs for two delays, zero outside the grid's bins for the operator's lifetime. */
  private readonly scattered: [Float64Array, Float64Array];
  /** FFT outputs of two delays (apply), or the spectrum gathered from (adjoint, scatter path). */
  private readonly transformed: [Float64Array, Float64Array];
  /** Adjoint's FFT input conj(g[· − k]) ⊙ y. */
  private readonly product: Float64Array;
  /** y modulated by e^{−2πi·dopplerFrom·t/n} (adjoint, in-place path with rotation). */
  private readonly demodulated: Float64Array;

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
    this.inPlace = L === n;
    this.blocks = new BlockViews(2 * n, grid.delays);
    const shift = ((grid.dopplerFrom % n) + n) % n;
    this.modulation = this.inPlace && shift !== 0 ? new Float64Array(2 * n) : null;
    for (let t = 0; t < n && this.modulation; t++) {
      const angle = (2 * Math.PI * ((shift * t) % n)) / n;
      this.modulation[2 * t] = Math.cos(angle);
      this.modulation[2 * t + 1] = Math.sin(angle);
    }
    this.bins = new Int32Array(L);
    for (let i = 0; i < L; i++) this.bins[i] = (shift + i) % n;
    this.scattered = [new Float64Array(2 * n), new Float64Array(2 * n)];
    this.transformed = [new Float64Array(2 * n), new Float64Array(2 * n)];
    this.product = new Float64Array(2 * n);
    this.demodulated = new Float64Array(2 * n);

    let energy = 0;
    let peak = 0;
    for (let t = 0; t < n; t++) {
      const p = window[2 * t]! ** 2 + window[2 * t + 1]! ** 2;
      energy += p;
      peak = Math.max(peak, p);
    }
    // The slack covers rounding in the energy sum (≤ 1024 terms), so the bound also holds for the stored window.
    this.normBound = Math.sqrt(Math.min(n * energy, grid.delays * n * peak, this.cols * energy)) * (1 + 1e-12);
  }

  apply(c: Float64Array, out: Float64Array): void {
    const n = this.size;
    const K = this.grid.delays;
    const first = this.transformed[0];
    const second = this.transformed[1];
    const views = this.inPlace ? this.blocks.of(c) : null;
    out.fill(0, 0, 2 * n);
    // Delays in pairs: one accumulation pass per two transforms halves the passes over out.
    let k = 0;
    for (; k + 1 < K; k += 2) {
      this.transformDelay(c, views, k, 0);
      this.transformDelay(c, views, k + 1, 1);
      accumulateShiftedPair(this.window, k, first, second, out, n);
    }
    if (k < K) {
      this.transformDelay(c, views, k, 0);
      accumulateShiftedProduct(this.window, k, first, out, n);
    }
    if (this.modulation !== null) multiplyInPlace(out, this.modulation, n, 1);
  }

  /** transformed[slot] ← FFT of c[k, ·] placed at the grid's bins (`views`: blocks of c, in-place path). */
  private transformDelay(c: Float64Array, views: Float64Array[] | null, k: number, slot: 0 | 1): void {
    const spectrum = this.transformed[slot];
    if (views !== null) {
      this.plan.forward(views[k]!, spectrum);
      return;
    }
    const L = this.dopplerBins;
    const bins = this.bins;
    const z = this.scattered[slot];
    const base = 2 * k * L;
    for (let i = 0; i < L; i++) {
      const b = 2 * bins[i]!;
      z[b] = c[base + 2 * i]!;
      z[b + 1] = c[base + 2 * i + 1]!;
    }
    this.plan.forward(z, spectrum);
  }

  adjoint(y: Float64Array, out: Float64Array): void {
    const n = this.size;
    const L = this.dopplerBins;
    const { bins, product: z, window: g } = this;
    const spectrum = this.transformed[0];
    const views = this.inPlace ? this.blocks.of(out) : null;
    let input = y;
    if (this.modulation !== null) {
      input = this.demodulated;
      for (let i = 0; i < 2 * n; i++) input[i] = y[i]!;
      multiplyInPlace(input, this.modulation, n, -1);
    }
    for (let k = 0; k < this.grid.delays; k++) {
      conjugateShiftedProduct(g, k, input, z, n);
      if (views !== null) {
        this.plan.forward(z, views[k]!);
        continue;
      }
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

/** out[t] += g[(t − k) mod n] · H[(−t) mod n], t = 0..n−1 (interleaved complex). */
function accumulateShiftedProduct(g: Float64Array, k: number, H: Float64Array, out: Float64Array, n: number): void {
  const n2 = 2 * n;
  let gi = k === 0 ? 0 : 2 * (n - k);
  let hi = 0;
  for (let i = 0; i < n2; i += 2) {
    const gr = g[gi]!;
    const gm = g[gi + 1]!;
    const hr = H[hi]!;
    const hm = H[hi + 1]!;
    out[i] += gr * hr - gm * hm;
    out[i + 1] += gr * hm + gm * hr;
    gi += 2;
    if (gi === n2) gi = 0;
    hi = n2 - i - 2;
  }
}

/** out[t] += g[(t − k) mod n] · H[(−t) mod n] + g[(t − k − 1) mod n] · Q[(−t) mod n], t = 0..n−1. */
function accumulateShiftedPair(
  g: Float64Array,
  k: number,
  H: Float64Array,
  Q: Float64Array,
  out: Float64Array,
  n: number,
): void {
  const n2 = 2 * n;
  let ga = k === 0 ? 0 : 2 * (n - k);
  let gb = 2 * (n - k - 1);
  let hi = 0;
  for (let i = 0; i < n2; i += 2) {
    const ar = g[ga]!;
    const am = g[ga + 1]!;
    const br = g[gb]!;
    const bm = g[gb + 1]!;
    const hr = H[hi]!;
    const hm = H[hi + 1]!;
    const qr = Q[hi]!;
    const qm = Q[hi + 1]!;
    out[i] += ar * hr - am * hm + br * qr - bm * qm;
    out[i + 1] += ar * hm + am * hr + br * qm + bm * qr;
    ga += 2;
    if (ga === n2) ga = 0;
    gb += 2;
    if (gb === n2) gb = 0;
    hi = n2 - i - 2;
  }
}

/** z[t] = conj(g[(t − k) mod n]) · y[t], t = 0..n−1 (interleaved complex). */
function conjugateShiftedProduct(g: Float64Array, k: number, y: Float64Array, z: Float64Array, n: number): void {
  const n2 = 2 * n;
  let gi = k === 0 ? 0 : 2 * (n - k);
  for (let i = 0; i < n2; i += 2) {
    const gr = g[gi]!;
    const gm = g[gi + 1]!;
    const yr = y[i]!;
    const ym = y[i + 1]!;
    z[i] = gr * yr + gm * ym;
    z[i + 1] = gr * ym - gm * yr;
    gi += 2;
    if (gi === n2) gi = 0;
  }
}

/** v[t] ← v[t] · w[t] (sign 1) or v[t] · conj(w[t]) (sign −1), t = 0..n−1. */
function multiplyInPlace(v: Float64Array, w: Float64Array, n: number, sign: 1 | -1): void {
  for (let i = 0; i < 2 * n; i += 2) {
    const vr = v[i]!;
    const vm = v[i + 1]!;
    const wr = w[i]!;
    const wm = sign * w[i + 1]!;
    v[i] = vr * wr - vm * wm;
    v[i + 1] = vr * wm + vm * wr;
  }
}
