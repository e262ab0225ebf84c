/**
 * buildOperator: from a validated description to a ready LinearOperator.
 * A = Φ ∘ synthesis: Φ is the measurement, the unknowns are the coefficients c of the
 * optional basis (x = synthesize(c)); without a basis the unknowns are x itself.
 */
import { makeBasis } from './bases/index.js';
import { ComposedOperator } from './compose.js';
import { DenseOperator } from './dense.js';
import {
  drawBernoulliEntries,
  drawGaussianEntries,
  drawGaussianWindow,
  drawRademacher,
  drawSteinhaus,
  drawUniformIndices,
  drawVariableDensityIndices,
  normalizeWindow,
} from './derivations.js';
import {
  isValidatedDescription,
  parseOperatorDescription,
  type Basis,
  type OperatorDescription,
  type SampleSet,
  type Window,
} from './description.js';
import { fullGrid, GaborOperator } from './gabor.js';
import { RowSamplingOperator, SubsampledDftOperator } from './sampling.js';
import type { LinearOperator } from './types.js';

/** A built operator that remembers the description it came from. */
export type DescribedOperator = LinearOperator & { readonly description: OperatorDescription };

/** Default decay of the variable-density law p(k) ∝ (1 + |k̃|)^(−decay). */
export const DEFAULT_DECAY = 1;

export function buildOperator(desc: OperatorDescription): DescribedOperator {
  const checked = isValidatedDescription(desc) ? desc : parseOperatorDescription(desc);
  return Object.assign(buildMeasurement(checked), { description: checked });
}

function buildMeasurement(desc: OperatorDescription): LinearOperator {
  switch (desc.kind) {
    case 'sampling': {
      const indices = sampleIndices(desc.samples, desc.n);
      // Time samples of a signal with sparse unitary spectrum: one FFT per call, no composition.
      if (desc.basis?.kind === 'dft') return new SubsampledDftOperator(desc.n, indices, 'idft');
      return withBasis(new RowSamplingOperator(desc.n, indices), desc.basis);
    }
    case 'partial_dft':
      return withBasis(new SubsampledDftOperator(desc.n, sampleIndices(desc.samples, desc.n), 'dft'), desc.basis);
    case 'gabor':
      return new GaborOperator(desc.n, gaborWindow(desc.window, desc.n), desc.grid ?? fullGrid(desc.n));
    case 'gaussian': {
      const entries = drawGaussianEntries(desc.rows * desc.cols, desc.seed, 1 / Math.sqrt(desc.rows));
      return withBasis(new DenseOperator(desc.rows, desc.cols, entries, null), desc.basis);
    }
    case 'bernoulli': {
      const entries = drawBernoulliEntries(desc.rows * desc.cols, desc.seed, 1 / Math.sqrt(desc.rows));
      return withBasis(new DenseOperator(desc.rows, desc.cols, entries, null), desc.basis);
    }
    case 'matrix': {
      const im = desc.im !== undefined && desc.im.some((v) => v !== 0) ? Float64Array.from(desc.im) : null;
      return withBasis(new DenseOperator(desc.rows, desc.cols, Float64Array.from(desc.re), im), desc.basis);
    }
  }
}

function withBasis(measurement: LinearOperator, basis: Basis | undefined): LinearOperator {
  if (!basis || basis.kind === 'identity') return measurement;
  return new ComposedOperator(measurement, makeBasis(basis.kind, measurement.cols, basis.levels));
}

/** The sample set's indices: drawn sets sorted ascending, explicit sets in the order given. */
export function sampleIndices(samples: SampleSet, n: number): Int32Array {
  switch (samples.law) {
    case 'uniform':
      return drawUniformIndices(n, samples.m, samples.seed);
    case 'variable_density':
      return drawVariableDensityIndices(n, samples.m, samples.seed, samples.decay ?? DEFAULT_DECAY);
    case 'explicit':
      return Int32Array.from(samples.indices);
  }
}

/** The window scaled to unit l2 norm (interleaved complex, length 2n): every column has unit norm. */
export function gaborWindow(window: Window, n: number): Float64Array {
  switch (window.kind) {
    case 'steinhaus':
      return normalizeWindow(drawSteinhaus(n, window.seed));
    case 'rademacher':
      return normalizeWindow(drawRademacher(n, window.seed));
    case 'gaussian':
      return normalizeWindow(drawGaussianWindow(n, window.seed));
    case 'explicit': {
      const raw = new Float64Array(2 * n);
      for (let t = 0; t < n; t++) {
        raw[2 * t] = window.re[t]!;
        raw[2 * t + 1] = window.im?.[t] ?? 0;
      }
      return normalizeWindow(raw);
    }
  }
}
