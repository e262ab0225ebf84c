import { describe, expect, it } from 'vitest';
import { MT19937 } from '../../operators/index.js';
import { parseSolverSettings, solve } from '../index.js';
import { gaussianMatrix, measure, norm, relativeError, sparseVector } from './helpers.js';
import { l1MinimiserByLp } from './lpReference.js';

function l1(x: Float64Array): number {
  let s = 0;
  for (let i = 0; i < x.length; i += 2) s += Math.hypot(x[i]!, x[i + 1]!);
  return s;
}

/**
 * Twelve random real problems: three shapes, sparsities from easy (exact recovery) to well past
 * the l1 phase transition (the minimiser is a vertex that is not the sparse signal).
 */
const PROBLEMS: Array<{ m: number; n: number; s: number }> = [];
for (const [m, n] of [
  [20, 50],
  [30, 80],
  [40, 100],
] as const) {
  for (const frac of [0.15, 0.35, 0.55, 0.8]) PROBLEMS.push({ m, n, s: Math.max(1, Math.round(frac * m)) });
}

describe('basis pursuit', () => {
  // Reference: the exact minimiser of min ‖x‖₁ s.t. Ax = y from HiGHS's simplex (general-purpose
  // LP solver from the registry) on the LP form x = u − v, u, v ≥ 0.
  it('matches the LP minimiser to 1e-6 in ‖x‖₁ and in x on 12 random real problems, recovery or not', async () => {
    let failures = 0;
    for (const [k, { m, n, s }] of PROBLEMS.entries()) {
      const A = gaussianMatrix(m, n, 100 + k);
      const x0 = sparseVector(n, s, new MT19937(200 + k), false);
      const y = measure(A, x0);
      const lp = await l1MinimiserByLp(A, y);
      const r = solve(A, y, parseSolverSettings({ method: 'basis_pursuit', tolerance: 1e-9, maxIterations: 50000 }));
      expect(r.converged).toBe(true);
      expect(Math.abs(l1(r.x) - lp.l1) / lp.l1).toBeLessThan(1e-6);
      expect(relativeError(r.x, lp.x)).toBeLessThan(1e-6);
      expect(r.relativeResidual).toBeLessThan(1e-9);
      if (relativeError(lp.x, x0) > 1e-3) failures++;
    }
    // The set must include problems where l1 does not return the sparse signal.
    expect(failures).toBeGreaterThanOrEqual(4);
  });

  // Duality (a definition): the reported dual point is feasible, and its objective −Re⟨ν, y⟩
  // equals ‖x‖₁ at the optimum.
  it('returns a feasible dual point whose objective matches ‖x‖₁', () => {
    const A = gaussianMatrix(30, 80, 7);
    const y = measure(A, sparseVector(80, 6, new MT19937(8), true));
    const r = solve(A, y, parseSolverSettings({ method: 'basis_pursuit', tolerance: 1e-9, maxIterations: 50000 }));
    const nu = r.warm.dual!;
    const g = new Float64Array(160);
    A.adjoint(nu, g);
    let peak = 0;
    for (let i = 0; i < g.length; i += 2) peak = Math.max(peak, Math.hypot(g[i]!, g[i + 1]!));
    expect(peak).toBeLessThanOrEqual(1 + 1e-12);
    let dual = 0;
    for (let i = 0; i < y.length; i++) dual -= nu[i]! * y[i]!;
    expect(Math.abs(dual - l1(r.x)) / l1(r.x)).toBeLessThan(1e-8);
    expect(r.evidence?.['primal_residual']).toBeLessThan(1e-9);
  });

  // Noise-aware form: the estimate must satisfy ‖Ax − y‖ ≤ ε (feasibility, by definition).
  it('keeps ‖Ax − y‖ within ε in the noise-aware form and reports both residuals', () => {
    const A = gaussianMatrix(40, 120, 9);
    const rng = new MT19937(10);
    const y = measure(A, sparseVector(120, 5, rng, true));
    const epsilon = 0.05 * norm(y);
    const r = solve(A, y, parseSolverSettings({ method: 'basis_pursuit', epsilon, refit: false }));
    expect(r.converged).toBe(true);
    // Converged means infeasible by at most tolerance·‖y‖ (default tolerance 1e-6).
    expect(r.residualNorm).toBeLessThanOrEqual(epsilon + 1e-6 * norm(y));
    expect(r.evidence?.['epsilon']).toBe(epsilon);
    expect(r.evidence).toHaveProperty('dual_residual');
    expect(r.evidence).toHaveProperty('primal_residual');
  });
});
