import { describe, expect, it } from 'vitest';
import { DenseOperator, MT19937, type LinearOperator } from '../../operators/index.js';
import { lambdaFromNoise, parseSolverSettings, solve } from '../index.js';
import { dftSampling, gaussian, gaussianMatrix, measure, operator, relativeError, sparseVector } from './helpers.js';

/** Complex soft thresholding of v at level t: the modulus shrinks by t, the phase stays. */
function softThreshold(v: Float64Array, t: number): Float64Array {
  const out = new Float64Array(v.length);
  for (let i = 0; i < v.length; i += 2) {
    const mod = Math.hypot(v[i]!, v[i + 1]!);
    const f = mod > t ? 1 - t / mod : 0;
    out[i] = f * v[i]!;
    out[i + 1] = f * v[i + 1]!;
  }
  return out;
}

/** A real m×n matrix (m ≥ n) with orthonormal columns: Gram–Schmidt on Gaussian columns. */
function orthonormalColumns(m: number, n: number, rng: MT19937): LinearOperator {
  const cols: Float64Array[] = [];
  for (let j = 0; j < n; j++) {
    const v = new Float64Array(m);
    for (let i = 0; i < m; i++) v[i] = gaussian(rng);
    for (let pass = 0; pass < 2; pass++) {
      for (const q of cols) {
        let d = 0;
        for (let i = 0; i < m; i++) d += q[i]! * v[i]!;
        for (let i = 0; i < m; i++) v[i] = v[i]! - d * q[i]!;
      }
    }
    let s = 0;
    for (let i = 0; i < m; i++) s += v[i]! * v[i]!;
    for (let i = 0; i < m; i++) v[i] = v[i]! / Math.sqrt(s);
    cols.push(v);
  }
  const re = new Float64Array(m * n);
  for (let i = 0; i < m; i++) for (let j = 0; j < n; j++) re[i * n + j] = cols[j]![i]!;
  return new DenseOperator(m, n, re, null);
}

/** The same operator with a looser norm bound, so FISTA has to iterate. */
function withNormBound(A: LinearOperator, normBound: number): LinearOperator {
  return { rows: A.rows, cols: A.cols, real: A.real, normBound, apply: (x, o) => A.apply(x, o), adjoint: (y, o) => A.adjoint(y, o) };
}

const exact = { tolerance: 1e-13, stepTolerance: 0, maxIterations: 20000, refit: false } as const;

describe('LASSO by FISTA', () => {
  // Closed form (Tibshirani, "Regression shrinkage and selection via the lasso", JRSS B 58(1),
  // 1996, orthonormal design): the minimiser of ½‖Ax − y‖² + λ‖x‖₁ is soft thresholding of Aᴴy
  // at λ; for complex x the threshold acts on the modulus (the proximal map of |·|, a definition).
  it('equals soft thresholding of Aᴴy for a unitary DFT (complex)', () => {
    const n = 64;
    const A = operator({ kind: 'partial_dft', n, samples: { law: 'explicit', indices: [...Array(n).keys()] } });
    const rng = new MT19937(11);
    const y = new Float64Array(2 * n);
    for (let i = 0; i < y.length; i++) y[i] = gaussian(rng);
    const aty = new Float64Array(2 * n);
    A.adjoint(y, aty);
    for (const lambda of [0.1, 0.5, 1.5]) {
      const r = solve(A, y, parseSolverSettings({ method: 'lasso', lambda, ...exact }));
      expect(relativeError(r.x, softThreshold(aty, lambda))).toBeLessThan(1e-10);
      expect(r.converged).toBe(true);
      expect(r.certificate.kind).toBe('duality_gap');
    }
  });

  it('equals soft thresholding of Aᴴy for orthonormal real columns, with a loose step', () => {
    const rng = new MT19937(12);
    const A0 = orthonormalColumns(48, 32, rng);
    const A = withNormBound(A0, 1.7); // step 1/1.7²: many iterations instead of one
    const y = new Float64Array(96);
    for (let i = 0; i < y.length; i += 2) y[i] = gaussian(rng);
    const aty = new Float64Array(64);
    A.adjoint(y, aty);
    const r = solve(A, y, parseSolverSettings({ method: 'lasso', lambda: 0.4, ...exact }));
    expect(relativeError(r.x, softThreshold(aty, 0.4))).toBeLessThan(1e-9);
    expect(r.iterations).toBeGreaterThan(5);
    expect(r.converged).toBe(true);
  });

  // Optimality conditions (a definition): x solves the LASSO iff Aᴴ(y − Ax) = λ·sign(x_j) on
  // the support and |Aᴴ(y − Ax)|_j ≤ λ off it.
  it('meets the LASSO optimality conditions on a Gaussian problem, certified by the gap', () => {
    const A = gaussianMatrix(60, 200, 3);
    const x0 = sparseVector(200, 8, new MT19937(4), true);
    const y = measure(A, x0);
    const lambda = 0.05;
    const r = solve(A, y, parseSolverSettings({ method: 'lasso', lambda, ...exact }));
    expect(r.converged).toBe(true);
    expect(r.certificate.value).toBeLessThan(1e-13);
    const res = new Float64Array(120);
    A.apply(r.x, res);
    for (let i = 0; i < res.length; i++) res[i] = y[i]! - res[i]!;
    const g = new Float64Array(400);
    A.adjoint(res, g);
    for (let j = 0; j < 200; j++) {
      const xm = Math.hypot(r.x[2 * j]!, r.x[2 * j + 1]!);
      const gm = Math.hypot(g[2 * j]!, g[2 * j + 1]!);
      if (xm > 0) {
        expect(Math.abs(gm - lambda)).toBeLessThan(1e-5 * lambda);
        // Same phase: g_j = λ x_j/|x_j|.
        expect(Math.abs(g[2 * j]! - (lambda * r.x[2 * j]!) / xm)).toBeLessThan(1e-5 * lambda);
      } else expect(gm).toBeLessThanOrEqual(lambda * (1 + 1e-6));
    }
  });

  // ‖Aᴴy‖∞ ≤ λ makes x = 0 optimal (the subgradient condition at 0): exact, no iterations.
  it('returns exactly zero when λ ≥ ‖Aᴴy‖∞', () => {
    const A = gaussianMatrix(20, 50, 5);
    const y = measure(A, sparseVector(50, 3, new MT19937(6), false));
    const r = solve(A, y, parseSolverSettings({ method: 'lasso', lambda: 1e6 }));
    expect(r.x.every((v) => v === 0)).toBe(true);
    expect(r.support.length).toBe(0);
    expect(r.converged).toBe(true);
    expect(r.relativeResidual).toBeCloseTo(1, 12);
  });

  it('takes λ from the noise level by the documented rule', () => {
    const A = dftSampling(256, 64, 7);
    const y = measure(A, sparseVector(256, 4, new MT19937(8), true));
    const sigma = 0.01;
    const r = solve(A, y, parseSolverSettings({ method: 'lasso' }), undefined, sigma);
    // Sampled rows of a unitary DFT: every column has norm √(m/n) = 0.5, so c̄ = 0.5 (definition);
    // the solver estimates c̄ from eight random probes (Hutchinson), hence the 3 % allowance.
    const lambda = r.evidence?.['lambda'] ?? NaN;
    expect(Math.abs(lambda / lambdaFromNoise(sigma, 256, 0.5, 1) - 1)).toBeLessThan(0.03);
    expect(r.warm.lambda).toBe(r.evidence?.['lambda']);
  });

  // Common practice, no source: a noiseless frame recovered by LASSO and refit on the detected
  // support comes back exact, not shrunk.
  it('comes back exact after the refit on noiseless data, shrunk without it', () => {
    const A = dftSampling(256, 64, 9);
    const x0 = sparseVector(256, 5, new MT19937(10), true);
    const y = measure(A, x0);
    const refit = solve(A, y, parseSolverSettings({ method: 'lasso' }));
    expect(relativeError(refit.x, x0)).toBeLessThan(1e-9);
    expect([...refit.support]).toEqual([...x0.keys()].filter((i) => i % 2 === 0 && (x0[i] !== 0 || x0[i + 1] !== 0)).map((i) => i / 2));
    const shrunk = solve(A, y, parseSolverSettings({ method: 'lasso', refit: false }));
    expect(relativeError(shrunk.x, x0)).toBeGreaterThan(1e-5);
  });

  // The finish on the support (Newton's method on the restricted optimality condition) must
  // land on the LASSO solution the gap certifies, and a next frame with the same support must
  // reuse the carried Gram matrix: one evaluation, no applies to rebuild it.
  it('finishes a warm frame with the same support in one evaluation on the carried Gram matrix', () => {
    const A = dftSampling(512, 128, 21);
    const rng = new MT19937(22);
    const x0 = sparseVector(512, 6, rng, true);
    const y1 = measure(A, x0);
    const y2 = y1.map((v, i) => v * (1 + 0.01 * Math.sin(i))); // a slightly different frame
    const settings = parseSolverSettings({ method: 'lasso', lambda: 0.01, refit: false });
    const first = solve(A, y1, settings);
    expect(first.converged).toBe(true);
    expect(first.warm.gram?.support).toEqual(first.support);
    const second = solve(A, y2, settings, first.warm);
    expect(second.converged).toBe(true);
    expect([...second.support]).toEqual([...first.support]);
    expect(second.iterations).toBe(1);
    expect(second.evidence?.['finish_iterations']).toBe(1);
    // Same answer as a cold solve of the second frame, to the accuracy the gaps certify.
    const cold = solve(A, y2, parseSolverSettings({ method: 'lasso', lambda: 0.01, refit: false, tolerance: 1e-12 }));
    expect(relativeError(second.x, cold.x)).toBeLessThan(1e-4);
  });
});
