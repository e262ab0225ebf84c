import { describe, expect, it } from 'vitest';
import { buildOperator, gaborWindow } from '../build.js';
import type { OperatorDescription } from '../description.js';
import { GaborOperator } from '../gabor.js';
import { MT19937 } from '../mt19937.js';
import { column, denseApply, denseColumns, innerProduct, maxAbsDiff, norm, randomComplex } from './helpers.js';

type GaborDescription = Extract<OperatorDescription, { kind: 'gabor' }>;

const CASES: GaborDescription[] = [
  { kind: 'gabor', n: 8, window: { kind: 'steinhaus', seed: 1 } },
  { kind: 'gabor', n: 12, window: { kind: 'rademacher', seed: 2 } },
  { kind: 'gabor', n: 32, window: { kind: 'steinhaus', seed: 3 } },
  { kind: 'gabor', n: 15, window: { kind: 'gaussian', seed: 4 }, grid: { delays: 4, dopplerFrom: -3, dopplerTo: 5 } },
  { kind: 'gabor', n: 32, window: { kind: 'steinhaus', seed: 5 }, grid: { delays: 6, dopplerFrom: 10, dopplerTo: 20 } },
  // All n Doppler bins, rotated (the in-place path with a modulation pass).
  { kind: 'gabor', n: 16, window: { kind: 'gaussian', seed: 6 }, grid: { delays: 5, dopplerFrom: -7, dopplerTo: 8 } },
  { kind: 'gabor', n: 9, window: { kind: 'steinhaus', seed: 7 }, grid: { delays: 9, dopplerFrom: 2, dopplerTo: 8 } },
  { kind: 'gabor', n: 7, window: { kind: 'explicit', re: [1, 2, 3, 0, 0, 0, -1], im: [0, 0, 1, 1, 0, 0, 0] } },
];

/**
 * The defining formula of column j = k·L + (l − dopplerFrom):
 * a_j[t] = e^{2πi l t/n} · g[(t − k) mod n] (documented convention, docs/operators.md).
 */
function formulaColumn(g: Float64Array, n: number, k: number, l: number): Float64Array {
  const out = new Float64Array(2 * n);
  for (let t = 0; t < n; t++) {
    const angle = (2 * Math.PI * ((((l * t) % n) + n) % n)) / n;
    const c = Math.cos(angle);
    const s = Math.sin(angle);
    const gi = ((t - k) % n + n) % n;
    const gr = g[2 * gi]!;
    const gm = g[2 * gi + 1]!;
    out[2 * t] = c * gr - s * gm;
    out[2 * t + 1] = c * gm + s * gr;
  }
  return out;
}

const gridOf = (d: GaborDescription) => d.grid ?? { delays: d.n, dopplerFrom: 0, dopplerTo: d.n - 1 };
const caseLabel = (d: GaborDescription) => `n=${d.n} ${d.window.kind} ${JSON.stringify(gridOf(d))}`;

describe('Gabor operator', () => {
  it.each(CASES.map((d) => [caseLabel(d), d] as const))('every column matches the explicit formula: %s', (_, desc) => {
    const op = buildOperator(desc);
    const g = gaborWindow(desc.window, desc.n);
    const { delays, dopplerFrom, dopplerTo } = gridOf(desc);
    const L = dopplerTo - dopplerFrom + 1;
    expect(op.rows).toBe(desc.n);
    expect(op.cols).toBe(delays * L);
    for (let k = 0; k < delays; k++) {
      for (let l = dopplerFrom; l <= dopplerTo; l++) {
        const j = k * L + (l - dopplerFrom);
        const col = column(op, j);
        expect(maxAbsDiff(col, formulaColumn(g, desc.n, k, l))).toBeLessThan(1e-13);
        expect(norm(col)).toBeCloseTo(1, 13); // unit-norm window ⇒ unit-norm columns
      }
    }
  });

  it.each(CASES.map((d) => [caseLabel(d), d] as const))('fast apply and adjoint equal the dense products (n ≤ 32): %s', (_, desc) => {
    // Reference: the dense n × K·L matrix assembled from the explicit formula above.
    const op = buildOperator(desc);
    const g = gaborWindow(desc.window, desc.n);
    const { delays, dopplerFrom, dopplerTo } = gridOf(desc);
    const dense: Float64Array[] = [];
    for (let k = 0; k < delays; k++) for (let l = dopplerFrom; l <= dopplerTo; l++) dense.push(formulaColumn(g, desc.n, k, l));
    const rng = new MT19937(desc.n);
    const c = randomComplex(op.cols, rng);
    const fast = new Float64Array(2 * op.rows);
    op.apply(c, fast);
    expect(maxAbsDiff(fast, denseApply(dense, c, op.rows))).toBeLessThan(1e-12);
    const y = randomComplex(op.rows, rng);
    const adj = new Float64Array(2 * op.cols);
    op.adjoint(y, adj);
    const expected = dense.flatMap((col) => innerProduct(col, y)); // (Aᴴ y)_j = a_j^H y
    expect(maxAbsDiff(adj, expected)).toBeLessThan(1e-12);
  });

  it('forms a tight frame on the full grid: A Aᴴ = n·I for a unit-norm window', () => {
    // Closed form derived in docs/operators.md: (A Aᴴ)[t, s] = Σ_k g[t−k] conj(g[s−k]) Σ_l e^{2πi l(t−s)/n} = n‖g‖² δ_ts.
    const n = 10;
    const op = buildOperator({ kind: 'gabor', n, window: { kind: 'gaussian', seed: 3 } });
    const cols = denseColumns(op);
    for (let t = 0; t < n; t++) {
      for (let s = 0; s < n; s++) {
        let re = 0;
        let im = 0;
        for (const a of cols) {
          re += a[2 * t]! * a[2 * s]! + a[2 * t + 1]! * a[2 * s + 1]!;
          im += a[2 * t + 1]! * a[2 * s]! - a[2 * t]! * a[2 * s + 1]!;
        }
        expect(re).toBeCloseTo(t === s ? n : 0, 11);
        expect(im).toBeCloseTo(0, 11);
      }
    }
  });

  it('bounds a sub-grid norm by min(n, K·n·max|g|², K·L)', () => {
    // Steinhaus window: max|g|² = 1/n, so K·n·max|g|² = K (docs/operators.md).
    const sub = buildOperator({ kind: 'gabor', n: 64, window: { kind: 'steinhaus', seed: 1 }, grid: { delays: 3, dopplerFrom: -5, dopplerTo: 5 } });
    expect(sub.normBound).toBeCloseTo(Math.sqrt(3), 10);
  });

  it('rejects windows and grids that do not fit when constructed directly', () => {
    const g = new Float64Array(16);
    g[0] = 1;
    expect(() => new GaborOperator(8, new Float64Array(10))).toThrow(RangeError);
    expect(() => new GaborOperator(8, g, { delays: 9, dopplerFrom: 0, dopplerTo: 1 })).toThrow(RangeError);
    expect(() => new GaborOperator(8, g, { delays: 2, dopplerFrom: -4, dopplerTo: 4 })).toThrow(RangeError);
  });
});
