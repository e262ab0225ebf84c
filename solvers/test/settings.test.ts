import { describe, expect, it } from 'vitest';
import { parseSolverSettings, SolverSettingsError } from '../index.js';
import { MAX_ITERATION_BUDGET } from '../settings.js';

function fieldOf(raw: unknown): string {
  try {
    parseSolverSettings(raw);
  } catch (err) {
    expect(err).toBeInstanceOf(SolverSettingsError);
    const e = err as SolverSettingsError;
    expect(e.message.startsWith(`${e.field}:`)).toBe(true);
    return e.field;
  }
  throw new Error('expected a SolverSettingsError');
}

describe('solver settings', () => {
  it('caps every iteration budget so one declaration cannot hold its worker', () => {
    for (const method of ['lasso', 'basis_pursuit', 'reweighted_l1', 'cosamp', 'iht']) {
      const sparsity = method === 'cosamp' || method === 'iht' ? { sparsity: 3 } : {};
      expect(fieldOf({ method, ...sparsity, maxIterations: MAX_ITERATION_BUDGET + 1 })).toBe('maxIterations');
      expect(parseSolverSettings({ method, ...sparsity, maxIterations: MAX_ITERATION_BUDGET })).toMatchObject({
        maxIterations: MAX_ITERATION_BUDGET,
      });
    }
  });

  it('fills the documented defaults', () => {
    expect(parseSolverSettings({ method: 'lasso' })).toEqual({
      method: 'lasso',
      refit: true,
      supportThreshold: 1e-3,
      maxIterations: 1000,
      tolerance: 1e-5,
      stepTolerance: 1e-12,
      lambdaFactor: 1,
      lambdaFloor: 1e-3,
      continuation: true,
      continuationFactor: 0.2,
      restart: true,
    });
    expect(parseSolverSettings({ method: 'basis_pursuit' })).toMatchObject({ maxIterations: 5000, tolerance: 1e-6, epsilonFactor: 1, refit: true });
    expect(parseSolverSettings({ method: 'reweighted_l1' })).toMatchObject({ reweightings: 6, maxIterations: 3000, tolerance: 1e-4 });
    expect(parseSolverSettings({ method: 'omp', sparsity: 4 })).toMatchObject({ sparsity: 4, tolerance: 1e-6, refit: true });
    expect(parseSolverSettings({ method: 'cosamp', sparsity: 4 })).toMatchObject({ maxIterations: 50 });
    expect(parseSolverSettings({ method: 'iht', sparsity: 4 })).toMatchObject({ maxIterations: 500 });
  });

  it('keeps explicit values', () => {
    const s = parseSolverSettings({ method: 'lasso', lambda: 0.3, refit: false, noiseSigma: 0.01 });
    expect(s).toMatchObject({ lambda: 0.3, refit: false, noiseSigma: 0.01 });
  });

  it('names the offending field', () => {
    expect(fieldOf(undefined)).toBe('settings');
    expect(fieldOf({})).toBe('method');
    expect(fieldOf({ method: 'newton' })).toBe('method');
    expect(fieldOf({ method: 'omp' })).toBe('sparsity');
    expect(fieldOf({ method: 'omp', sparsity: 2.5 })).toBe('sparsity');
    expect(fieldOf({ method: 'lasso', lambda: -1 })).toBe('lambda');
    expect(fieldOf({ method: 'lasso', tolerance: 0 })).toBe('tolerance');
    expect(fieldOf({ method: 'lasso', maxIterations: 0 })).toBe('maxIterations');
    expect(fieldOf({ method: 'basis_pursuit', epsilon: Number.POSITIVE_INFINITY })).toBe('epsilon');
    expect(fieldOf({ method: 'lasso', lamda: 0.1 })).toBe('lamda');
    expect(fieldOf({ method: 'iht', sparsity: 3, epsilon: 1 })).toBe('epsilon');
  });

  it('says which methods exist when the method is unknown', () => {
    expect(() => parseSolverSettings({ method: 'newton' })).toThrow(/lasso, basis_pursuit, omp, cosamp, iht, reweighted_l1/);
  });
});
