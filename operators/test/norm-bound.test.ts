import { describe, expect, it } from 'vitest';
import { buildOperator } from '../build.js';
import { MT19937 } from '../mt19937.js';
import { spectralNormBound } from '../norm-bound.js';
import { powerIterationNorm } from './helpers.js';

describe('dense spectral norm bound', () => {
  it('is tight on a complex diagonal matrix: ‖diag(d)‖₂ = max|d|', () => {
    // Closed form: the singular values of a diagonal matrix are |d_i|.
    const d = [
      [1, 0],
      [0, -3],
      [0, 2],
      [0.5, 0.5],
    ];
    const n = d.length;
    const re = new Float64Array(n * n);
    const im = new Float64Array(n * n);
    d.forEach(([r, i], k) => {
      re[k * n + k] = r!;
      im[k * n + k] = i!;
    });
    const bound = spectralNormBound(n, n, re, im);
    expect(bound).toBeGreaterThanOrEqual(3);
    expect(bound).toBeLessThan(3 * 1.002);
  });

  it('is tight on a rank-one matrix: ‖u vᵀ‖₂ = ‖u‖‖v‖', () => {
    // Closed form: a rank-one matrix has one nonzero singular value ‖u‖·‖v‖.
    const rng = new MT19937(4);
    const u = Array.from({ length: 30 }, () => rng.nextDouble() - 0.5);
    const v = Array.from({ length: 70 }, () => rng.nextDouble() - 0.5);
    const re = new Float64Array(30 * 70);
    u.forEach((ui, i) => v.forEach((vj, j) => (re[i * 70 + j] = ui * vj)));
    const exact = Math.hypot(...u) * Math.hypot(...v);
    for (const [rows, cols, data] of [
      [30, 70, re],
      [70, 30, transpose(re, 30, 70)],
    ] as const) {
      const bound = spectralNormBound(rows, cols, data, null);
      expect(bound).toBeGreaterThanOrEqual(exact);
      expect(bound).toBeLessThan(exact * 1.002);
    }
  });

  it('certifies Gaussian and complex matrices within a few percent of the power-iteration norm', () => {
    // ‖A‖₂ ≥ power-iteration estimates (Golub & Van Loan §8.2), so estimate ≤ bound must hold;
    // the 5 % ceiling checks the certificate is doing its job (the cheap bounds are far looser).
    const cases = [
      buildOperator({ kind: 'gaussian', rows: 48, cols: 160, seed: 9 }),
      buildOperator({ kind: 'bernoulli', rows: 120, cols: 40, seed: 10 }),
      buildOperator({
        kind: 'matrix',
        rows: 20,
        cols: 30,
        re: Array.from({ length: 600 }, (_, i) => Math.sin(i)),
        im: Array.from({ length: 600 }, (_, i) => Math.cos(i * i)),
      }),
    ];
    for (const op of cases) {
      const estimate = powerIterationNorm(op, 300, new MT19937(2));
      expect(estimate).toBeLessThanOrEqual(op.normBound);
      expect(op.normBound).toBeLessThan(estimate * 1.05);
    }
  });

  it('falls back to the Frobenius / Schur bound above the certification budget, still a true bound', () => {
    // Bernoulli 2048 × 2048: every row and column has l1 norm √2048 and ‖A‖_F = √2048, so the
    // cheap bound is √2048 (closed form); the true norm is about 2 (Marchenko–Pastur edge).
    const op = buildOperator({ kind: 'bernoulli', rows: 2048, cols: 2048, seed: 1 });
    expect(op.normBound).toBeCloseTo(Math.sqrt(2048) * (1 + 1e-9), 9);
    expect(powerIterationNorm(op, 8, new MT19937(3))).toBeLessThanOrEqual(op.normBound);
  });
});

function transpose(a: Float64Array, rows: number, cols: number): Float64Array {
  const t = new Float64Array(rows * cols);
  for (let i = 0; i < rows; i++) for (let j = 0; j < cols; j++) t[j * rows + i] = a[i * cols + j]!;
  return t;
}
