import { describe, expect, it } from 'vitest';
import { MT19937 } from '../../operators/index.js';
import { parseSolverSettings, solve, SolverInputError, type SolveResult } from '../index.js';
import { addNoise, dftSampling, gaussianMatrix, measure, norm, relativeError, sparseVector } from './helpers.js';

const ALL_METHODS = [
  { method: 'lasso' },
  { method: 'basis_pursuit' },
  { method: 'reweighted_l1' },
  { method: 'omp', sparsity: 6 },
  { method: 'cosamp', sparsity: 6 },
  { method: 'iht', sparsity: 6 },
] as const;

function bytes(v: Float64Array): Uint8Array {
  return new Uint8Array(v.buffer, v.byteOffset, v.byteLength);
}

function errorOf(run: () => unknown): SolverInputError {
  try {
    run();
  } catch (err) {
    expect(err).toBeInstanceOf(SolverInputError);
    return err as SolverInputError;
  }
  throw new Error('expected a SolverInputError');
}

describe('solve()', () => {
  it('is deterministic: the same input gives bit-identical output for every method', () => {
    const A = dftSampling(128, 40, 1);
    const rng = new MT19937(2);
    const y = measure(A, sparseVector(128, 5, rng, true));
    addNoise(y, 1e-3, rng);
    for (const raw of ALL_METHODS) {
      const settings = parseSolverSettings(raw);
      const a = solve(A, y, settings);
      // A second operator instance (fresh workspace) and a reused one must agree bit for bit.
      const b = solve(dftSampling(128, 40, 1), y, settings);
      const c = solve(A, y, settings);
      for (const other of [b, c]) {
        expect(bytes(other.x)).toEqual(bytes(a.x));
        expect(other.iterations).toBe(a.iterations);
        expect(other.certificate).toEqual(a.certificate);
      }
    }
  });

  it('gives bit-identical results when the caller lends its buffers, frame after frame with warm starts', () => {
    // Lent buffers only change where results live: a sequence of warm-started solves must
    // match the allocating path bit for bit, for every method.
    const rng = new MT19937(11);
    const x0 = sparseVector(128, 5, rng, true);
    const frames = Array.from({ length: 4 }, () => {
      const y = measure(dftSampling(128, 40, 1), x0);
      addNoise(y, 1e-3, rng);
      return y;
    });
    for (const raw of ALL_METHODS) {
      const settings = parseSolverSettings(raw);
      const [A, B] = [dftSampling(128, 40, 1), dftSampling(128, 40, 1)];
      const buffers = { x: new Float64Array(256), iterates: [new Float64Array(256), new Float64Array(256)] as [Float64Array, Float64Array] };
      let warmA: SolveResult['warm'] | undefined;
      let warmB: SolveResult['warm'] | undefined;
      for (const y of frames) {
        const a = solve(A, y, settings, warmA);
        const b = solve(B, y, settings, warmB, undefined, buffers);
        expect(b.x).toBe(buffers.x);
        expect(bytes(b.x)).toEqual(bytes(a.x));
        expect(bytes(b.warm.x!)).toEqual(bytes(a.warm.x!));
        expect(b.iterations).toBe(a.iterations);
        warmA = a.warm;
        warmB = b.warm;
      }
    }
    const wrong = { x: new Float64Array(10), iterates: [new Float64Array(256), new Float64Array(256)] as [Float64Array, Float64Array] };
    expect(errorOf(() => solve(dftSampling(128, 40, 1), frames[0]!, parseSolverSettings({ method: 'lasso' }), undefined, undefined, wrong)).field).toBe('buffers.x');
  });

  it('reports the evidence every method owes', () => {
    const A = gaussianMatrix(40, 100, 3);
    const x0 = sparseVector(100, 6, new MT19937(4), true);
    const y = measure(A, x0);
    for (const raw of ALL_METHODS) {
      const r = solve(A, y, parseSolverSettings(raw));
      expect(r.x.length).toBe(200);
      expect([...r.support]).toEqual([...r.support].sort((p, q) => p - q));
      const ax = measure(A, r.x);
      const res = norm(ax.map((v, i) => v - y[i]!));
      expect(r.residualNorm).toBeCloseTo(res, 12);
      expect(r.relativeResidual).toBeCloseTo(res / norm(y), 12);
      expect(typeof r.certificate.kind).toBe('string');
      expect(Number.isFinite(r.certificate.value)).toBe(true);
      expect(r.supportChange).toEqual({ added: 0, removed: 0 });
      expect(r.warm.x?.length).toBe(200);
      expect(r.warm.support).toEqual(r.support);
    }
  });

  it('names the bad input', () => {
    const A = gaussianMatrix(10, 30, 5);
    const settings = parseSolverSettings({ method: 'lasso' });
    expect(errorOf(() => solve(A, new Float64Array(18), settings)).field).toBe('y');
    const y = new Float64Array(20);
    y[3] = Number.NaN;
    expect(errorOf(() => solve(A, y, settings)).message).toMatch(/^y: .*non-finite/);
    expect(errorOf(() => solve(A, new Float64Array(20), settings, undefined, -1)).field).toBe('noiseSigma');
  });

  it('accepts a warm state from another method and ignores parts that do not fit', () => {
    const A = gaussianMatrix(40, 100, 6);
    const x0 = sparseVector(100, 5, new MT19937(7), true);
    const y = measure(A, x0);
    const fromLasso = solve(A, y, parseSolverSettings({ method: 'lasso' })).warm;
    for (const raw of ALL_METHODS) {
      const r = solve(A, y, parseSolverSettings(raw), fromLasso);
      expect(relativeError(r.x, x0)).toBeLessThan(1e-6);
    }
    const misfit = { x: new Float64Array(10), dual: new Float64Array(3), lambda: -1, support: new Int32Array([1, 2]) };
    const r = solve(A, y, parseSolverSettings({ method: 'basis_pursuit' }), misfit);
    expect(relativeError(r.x, x0)).toBeLessThan(1e-6);
  });

  it('counts how the support moved against the warm state', () => {
    const A = dftSampling(128, 48, 8);
    const x0 = new Float64Array(256);
    x0[2 * 10] = 1;
    x0[2 * 40] = -0.7;
    x0[2 * 90 + 1] = 0.5;
    const settings = parseSolverSettings({ method: 'basis_pursuit' });
    const first = solve(A, measure(A, x0), settings);
    expect([...first.support]).toEqual([10, 40, 90]);
    // The tone at bin 40 moves to bin 41.
    const x1 = x0.slice();
    x1[2 * 41] = x1[2 * 40]!;
    x1[2 * 40] = 0;
    const second = solve(A, measure(A, x1), settings, first.warm);
    expect([...second.support]).toEqual([10, 41, 90]);
    expect(second.supportChange).toEqual({ added: 1, removed: 1 });
  });

  // Common practice, no source: consecutive frames of a slowly changing scene start close to
  // their solution, so a warm start needs far fewer iterations than a cold one (the bench
  // measures the ratio; this test guards against losing the effect).
  it('needs far fewer LASSO iterations per frame warm than cold on a slowly drifting scene', () => {
    const n = 256;
    const A = dftSampling(n, 64, 9);
    const rng = new MT19937(10);
    const bins = [12, 57, 140, 201];
    const settings = parseSolverSettings({ method: 'lasso' });
    let warm: SolveResult['warm'] | undefined;
    let warmIterations = 0;
    let coldIterations = 0;
    for (let frame = 0; frame < 12; frame++) {
      const x = new Float64Array(2 * n);
      bins.forEach((b, i) => {
        const amp = 1 + 0.3 * i + 0.01 * frame;
        const phase = 0.7 * i + 0.02 * frame;
        x[2 * b] = amp * Math.cos(phase);
        x[2 * b + 1] = amp * Math.sin(phase);
      });
      const y = measure(A, x);
      addNoise(y, 1e-3, rng);
      const cold = solve(A, y, settings, undefined, 1e-3);
      const hot = solve(A, y, settings, warm, 1e-3);
      warm = hot.warm;
      expect(hot.converged).toBe(true);
      expect(relativeError(hot.x, x)).toBeLessThan(0.01);
      if (frame > 0) {
        coldIterations += cold.iterations;
        warmIterations += hot.iterations;
      }
    }
    expect(warmIterations).toBeLessThan(0.5 * coldIterations);
  });

  // Common practice, no source: without a noise level LASSO estimates σ from the residual of the
  // least-squares fit on its support, ‖y − A x‖/√(m − s).
  it('estimates the noise level when none is given', () => {
    const A = dftSampling(256, 96, 11);
    const rng = new MT19937(12);
    const sigma = 0.02;
    // Five unit-modulus coefficients of random phase: all well above the noise.
    const x0 = sparseVector(256, 5, rng, true);
    for (let i = 0; i < x0.length; i += 2) {
      const mod = Math.hypot(x0[i]!, x0[i + 1]!);
      if (mod > 0) [x0[i], x0[i + 1]] = [x0[i]! / mod, x0[i + 1]! / mod];
    }
    const y = measure(A, x0);
    addNoise(y, sigma, rng);
    const r = solve(A, y, parseSolverSettings({ method: 'lasso' }));
    const estimate = r.evidence?.['noise_sigma_estimate'] ?? NaN;
    expect(estimate / sigma).toBeGreaterThan(0.75);
    expect(estimate / sigma).toBeLessThan(1.33);
    expect(r.support.length).toBe(5);
  });
});
