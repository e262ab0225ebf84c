/** Public surface of the operators package: matrix-free measurement operators and sparsity bases. */
export type { LinearOperator, UnitaryBasis } from './types.js';
export { MT19937 } from './mt19937.js';
export { fftPlan, isPowerOfTwo, type FftPlan } from './fft.js';
export {
  LIMITS,
  OperatorDescriptionError,
  parseOperatorDescription,
  type Basis,
  type GaborGridDescription,
  type OperatorDescription,
  type SampleSet,
  type Window,
} from './description.js';
export { buildOperator, gaborWindow, sampleIndices, DEFAULT_DECAY, type DescribedOperator } from './build.js';
export { makeBasis, defaultWaveletLevels, type BasisKind } from './bases/index.js';
export { Dct2Basis, DftBasis, IdentityBasis, PeriodicWaveletBasis, DB4_FILTER, HAAR_FILTER } from './bases/index.js';
export { GaborOperator, fullGrid, type DelayDopplerGrid } from './gabor.js';
export { RowSamplingOperator, SubsampledDftOperator } from './sampling.js';
export { DenseOperator } from './dense.js';
export { ComposedOperator } from './compose.js';
export { spectralNormBound } from './norm-bound.js';
export {
  absSignedFrequency,
  drawBernoulliEntries,
  drawGaussianEntries,
  drawGaussianWindow,
  drawRademacher,
  drawSteinhaus,
  drawUniformIndices,
  drawVariableDensityIndices,
  normalizeWindow,
} from './derivations.js';
