import { describe, expect, it } from 'vitest';
import { MT19937 } from '../../operators/index.js';
import { parseSolverSettings, solve } from '../index.js';
import { addNoise, dftSampling, gaussianMatrix, measure, relativeError, sparseVector, successRate } from './helpers.js';

const DRAWS = 30;

describe('greedy methods', () => {
  // OMP recovers an s-sparse signal from m ≳ C·s·ln n Gaussian measurements with high probability
  // (Tropp & Gilbert, IEEE Trans. Inf. Theory 53(12), 2007); CoSaMP and normalised IHT carry
  // the same kind of guarantee (Needell & Tropp 2009; Blumensath & Davies 2010). Well inside
  // that regime (m = 64, n = 256, s = 5) all three must recover nearly every draw exactly.
  for (const method of ['omp', 'cosamp', 'iht'] as const) {
    it(`${method} recovers 5-sparse signals from 64 Gaussian measurements of 256`, () => {
      const settings = parseSolverSettings({ method, sparsity: 5 });
      const rate = successRate(DRAWS, (d) => {
        const A = gaussianMatrix(64, 256, 90_000 + d);
        const x0 = sparseVector(256, 5, new MT19937(91_000 + d), true);
        const r = solve(A, measure(A, x0), settings);
        return relativeError(r.x, x0) < 1e-6 && r.converged && r.support.length === 5;
      });
      expect(rate).toBeGreaterThanOrEqual(0.9);
    });
  }

  it('OMP with a sparsity bound stops once the residual vanishes, and at the noise level with σ', () => {
    const A = dftSampling(256, 64, 5);
    const rng = new MT19937(6);
    const x0 = sparseVector(256, 4, rng, true);
    const y = measure(A, x0);
    const bounded = solve(A, y, parseSolverSettings({ method: 'omp', sparsity: 12 }));
    expect(bounded.support.length).toBe(4);
    expect(bounded.iterations).toBe(4);
    expect(bounded.certificate.kind).toBe('relative_residual');
    expect(bounded.certificate.value).toBeLessThan(1e-6);
    const sigma = 1e-3;
    addNoise(y, sigma, rng);
    const noisy = solve(A, y, parseSolverSettings({ method: 'omp', sparsity: 12 }), undefined, sigma);
    expect(noisy.converged).toBe(true);
    expect(noisy.support.length).toBe(4);
  });

  it('reports not converged when the sparsity bound is too small for the data', () => {
    const A = gaussianMatrix(40, 120, 7);
    const y = measure(A, sparseVector(120, 8, new MT19937(8), false));
    for (const method of ['omp', 'cosamp', 'iht'] as const) {
      const r = solve(A, y, parseSolverSettings({ method, sparsity: 3 }));
      expect(r.converged).toBe(false);
      expect(r.support.length).toBeLessThanOrEqual(3);
    }
  });

  it('CoSaMP and IHT start from the previous frame and need fewer iterations there', () => {
    const A = gaussianMatrix(64, 256, 9);
    const x0 = sparseVector(256, 6, new MT19937(10), true);
    const y = measure(A, x0);
    for (const method of ['cosamp', 'iht'] as const) {
      const settings = parseSolverSettings({ method, sparsity: 6 });
      const cold = solve(A, y, settings);
      const warm = solve(A, y, settings, cold.warm);
      expect(relativeError(warm.x, x0)).toBeLessThan(1e-6);
      expect(warm.iterations).toBeLessThan(Math.max(1, cold.iterations));
    }
  });
});
