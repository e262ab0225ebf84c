/**
 * FFT backend: complex DFTs of any length over interleaved Float64Arrays.
 *
 *   forward(x, out, scale = 1):    out[k] = scale · Σ_t x[t] e^{-2πi kt/n}
 *   inverse(x, out, scale = 1/n):  out[t] = scale · Σ_k x[k] e^{+2πi kt/n}
 *
 * so inverse(forward(x)) = x with the default scales, and scale = 1/√n on both gives the
 * unitary pair. Powers of two run on fft.js (radix-4, out-of-place, forward kernel
 * e^{-2πi kn/N}, unnormalised); every other length runs Bluestein's chirp-z algorithm on a
 * power-of-two fft.js transform of length ≥ 2n − 1.
 *
 * The inverse never calls fft.js's inverseTransform (slower, and it always divides by n):
 * Σ_k x[k] e^{+2πi kt/n} = Σ_k x[(−k) mod n] e^{−2πi kt/n}, so reading the input in
 * reversed index order (with the scale folded into that one pass) and transforming forward
 * gives the inverse. Callers that scatter into their own zeroed buffer can use the same
 * identity and call forward directly with no extra pass.
 *
 * Plans are cached per length (one per thread) and own their scratch, so calls allocate
 * nothing. `x` and `out` must be distinct arrays of length ≥ 2n; `x` is never modified.
 */
import FFT from 'fft.js';

export interface FftPlan {
  readonly size: number;
  forward(x: Float64Array, out: Float64Array, scale?: number): void;
  inverse(x: Float64Array, out: Float64Array, scale?: number): void;
}

const plans = new Map<number, FftPlan>();

/** The cached plan for length n (a positive integer). */
export function fftPlan(n: number): FftPlan {
  let plan = plans.get(n);
  if (plan === undefined) {
    if (!Number.isInteger(n) || n < 1) throw new RangeError(`FFT length must be a positive integer, got ${n}`);
    if (n === 1) plan = new LengthOnePlan();
    else if (isPowerOfTwo(n)) plan = new PowerOfTwoPlan(n);
    else plan = new BluesteinPlan(n);
    plans.set(n, plan);
  }
  return plan;
}

export function isPowerOfTwo(n: number): boolean {
  return n >= 1 && (n & (n - 1)) === 0;
}

/** out[0..2n) ← scale · out[0..2n). */
function scaleInPlace(out: Float64Array, n2: number, scale: number): void {
  for (let i = 0; i < n2; i++) out[i]! *= scale;
}

class LengthOnePlan implements FftPlan {
  readonly size = 1;
  forward(x: Float64Array, out: Float64Array, scale = 1): void {
    out[0] = x[0]! * scale;
    out[1] = x[1]! * scale;
  }
  inverse(x: Float64Array, out: Float64Array, scale = 1): void {
    this.forward(x, out, scale);
  }
}

class PowerOfTwoPlan implements FftPlan {
  private readonly fft: FFT;
  private readonly reversed: Float64Array;

  constructor(readonly size: number) {
    this.fft = new FFT(size);
    this.reversed = new Float64Array(2 * size);
  }

  forward(x: Float64Array, out: Float64Array, scale = 1): void {
    this.fft.transform(out, x);
    if (scale !== 1) scaleInPlace(out, 2 * this.size, scale);
  }

  inverse(x: Float64Array, out: Float64Array, scale = 1 / this.size): void {
    const n = this.size;
    const r = this.reversed;
    r[0] = x[0]! * scale;
    r[1] = x[1]! * scale;
    for (let k = 1; k < n; k++) {
      const j = 2 * (n - k);
      r[2 * k] = x[j]! * scale;
      r[2 * k + 1] = x[j + 1]! * scale;
    }
    this.fft.transform(out, r);
  }
}

/**
 * Bluestein: with w_k = e^{−πi k²/n}, X_j = w_j · Σ_k (x_k w_k) · conj(w_{j−k}), a linear
 * convolution evaluated as a circular one of length M ≥ 2n − 1 (a power of two).
 * k² is reduced modulo 2n in integer arithmetic before taking cos/sin, which keeps the
 * chirp accurate for large k.
 */
class BluesteinPlan implements FftPlan {
  private readonly m: number;
  private readonly inner: PowerOfTwoPlan;
  /** w_k = e^{−πi k²/n}, k = 0..n−1 (interleaved). */
  private readonly chirp: Float64Array;
  /** FFT_M of the conjugate chirp, premultiplied by 1/M (the circular convolution's inverse scale). */
  private readonly kernelSpectrum: Float64Array;
  /** Chirped input; entries n..M−1 stay zero for the plan's lifetime. */
  private readonly a: Float64Array;
  private readonly b: Float64Array;
  private readonly c: Float64Array;

  constructor(readonly size: number) {
    const n = size;
    let m = 1;
    while (m < 2 * n - 1) m *= 2;
    this.m = m;
    this.inner = fftPlan(m) as PowerOfTwoPlan;
    this.chirp = new Float64Array(2 * n);
    for (let k = 0; k < n; k++) {
      const angle = (Math.PI * ((k * k) % (2 * n))) / n;
      this.chirp[2 * k] = Math.cos(angle);
      this.chirp[2 * k + 1] = -Math.sin(angle);
    }
    const kernel = new Float64Array(2 * m);
    for (let k = 0; k < n; k++) {
      const re = this.chirp[2 * k]! / m;
      const im = -this.chirp[2 * k + 1]! / m;
      kernel[2 * k] = re;
      kernel[2 * k + 1] = im;
      if (k > 0) {
        kernel[2 * (m - k)] = re;
        kernel[2 * (m - k) + 1] = im;
      }
    }
    this.kernelSpectrum = new Float64Array(2 * m);
    this.inner.forward(kernel, this.kernelSpectrum);
    this.a = new Float64Array(2 * m);
    this.b = new Float64Array(2 * m);
    this.c = new Float64Array(2 * m);
  }

  forward(x: Float64Array, out: Float64Array, scale = 1): void {
    this.run(x, out, scale, false);
  }

  inverse(x: Float64Array, out: Float64Array, scale = 1 / this.size): void {
    this.run(x, out, scale, true);
  }

  /** Forward DFT of x (or of x read at (−k) mod n, which is the unnormalised inverse). */
  private run(x: Float64Array, out: Float64Array, scale: number, reversed: boolean): void {
    const n = this.size;
    const m = this.m;
    const { a, b, c, chirp, kernelSpectrum: h } = this;
    for (let k = 0; k < n; k++) {
      const src = reversed && k > 0 ? 2 * (n - k) : 2 * k;
      const xr = x[src]!;
      const xi = x[src + 1]!;
      const wr = chirp[2 * k]!;
      const wi = chirp[2 * k + 1]!;
      a[2 * k] = xr * wr - xi * wi;
      a[2 * k + 1] = xr * wi + xi * wr;
    }
    this.inner.forward(a, b);
    for (let i = 0; i < 2 * m; i += 2) {
      const br = b[i]!;
      const bi = b[i + 1]!;
      const hr = h[i]!;
      const hi = h[i + 1]!;
      c[i] = br * hr - bi * hi;
      c[i + 1] = br * hi + bi * hr;
    }
    // Circular convolution = inverse FFT of the product = forward FFT read at (−j) mod M.
    this.inner.forward(c, b);
    for (let j = 0; j < n; j++) {
      const src = j === 0 ? 0 : 2 * (m - j);
      const cr = b[src]!;
      const ci = b[src + 1]!;
      const wr = chirp[2 * j]!;
      const wi = chirp[2 * j + 1]!;
      out[2 * j] = (cr * wr - ci * wi) * scale;
      out[2 * j + 1] = (cr * wi + ci * wr) * scale;
    }
  }
}
