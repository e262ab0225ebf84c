import { buildOperator, makeBasis, MT19937, parseOperatorDescription } from '../../operators/index.js';

/**
 * Synthetic truths for the end-to-end tests: an operator description, a sparse coefficient
 * vector per frame, and the exact measurements y = A c (computed with the operator itself, so
 * the truth is known by construction).
 */
export interface SyntheticStream {
  operator: object;
  rows: number;
  cols: number;
  /** Coefficients of frame `t` (interleaved complex, length 2·cols). */
  coefficients(t: number): Float64Array;
  /** The signal of frame `t` (basis synthesis of its coefficients). */
  signal(t: number): Float64Array;
  /** y = A c(t) (+ complex noise of RMS `sigma` per measurement, seeded). */
  measurements(t: number, sigma?: number, seed?: number): Float64Array;
  support: number[];
}

function fromDescription(description: object, support: number[], amplitude: (j: number, t: number) => [number, number], basisKind?: 'haar'): SyntheticStream {
  const A = buildOperator(parseOperatorDescription(description));
  const basis = basisKind ? makeBasis(basisKind, A.cols) : undefined;
  const coefficients = (t: number) => {
    const c = new Float64Array(2 * A.cols);
    support.forEach((col, j) => {
      const [re, im] = amplitude(j, t);
      c[2 * col] = re;
      c[2 * col + 1] = im;
    });
    return c;
  };
  return {
    operator: description,
    rows: A.rows,
    cols: A.cols,
    support,
    coefficients,
    signal: (t) => {
      const c = coefficients(t);
      if (!basis) return c;
      const x = new Float64Array(c.length);
      basis.synthesize(c, x);
      return x;
    },
    measurements: (t, sigma = 0, seed = 7) => {
      const y = new Float64Array(2 * A.rows);
      A.apply(coefficients(t), y);
      if (sigma > 0) {
        // Circular complex Gaussian noise with E|e_i|² = σ² (Box–Muller on MT19937 draws).
        const rng = new MT19937(seed + 7919 * t);
        for (let i = 0; i < y.length; i += 2) {
          const r = Math.sqrt(-2 * Math.log(1 - rng.nextDouble())) * (sigma / Math.SQRT2);
          const phi = 2 * Math.PI * rng.nextDouble();
          y[i] += r * Math.cos(phi);
          y[i + 1] += r * Math.sin(phi);
        }
      }
      return y;
    },
  };
}

/** Subsampled DFT: m of the n rows of the unitary DFT, an s-sparse complex signal (slowly rotating phases). */
export function dftStream(n = 256, m = 64, support = [7, 60, 130, 201]): SyntheticStream {
  return fromDescription({ kind: 'partial_dft', n, samples: { law: 'uniform', m, seed: 11 } }, support, (j, t) => {
    const a = 1 + 0.25 * j;
    const phase = 0.3 * j + 0.05 * t;
    return [a * Math.cos(phase), a * Math.sin(phase)];
  });
}

/** Gabor (time-frequency shifts of a Steinhaus window), n = 32 on an 8-delay × 8-Doppler sub-grid: three scatterers. */
export function gaborStream(): SyntheticStream {
  return fromDescription(
    { kind: 'gabor', n: 32, window: { kind: 'steinhaus', seed: 5 }, grid: { delays: 8, dopplerFrom: -4, dopplerTo: 3 } },
    [3, 21, 50],
    (j, t) => [1 - 0.2 * j + 0.01 * t, 0.3 * j],
  );
}

/** Gaussian 64 × 128 measurements of a piecewise-constant signal, sparse in the Haar basis. */
export function gaussianHaarStream(): SyntheticStream {
  // Steps at multiples of 32 touch only the coarse Haar levels: a handful of nonzero coefficients.
  const n = 128;
  const levels = [1.0, 3.0, -1.5, 0.5];
  const analyzer = makeBasis('haar', n);
  const signal = new Float64Array(2 * n);
  for (let i = 0; i < n; i++) signal[2 * i] = levels[Math.floor(i / 32)]!;
  const c = new Float64Array(2 * n);
  analyzer.analyze(signal, c);
  const support: number[] = [];
  for (let j = 0; j < n; j++) if (Math.hypot(c[2 * j]!, c[2 * j + 1]!) > 1e-9) support.push(j);
  return fromDescription({ kind: 'gaussian', rows: 64, cols: n, seed: 3, basis: { kind: 'haar' } }, support, (j, t) => [c[2 * support[j]!]! * (1 + 0.01 * t), 0], 'haar');
}
