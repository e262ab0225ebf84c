import { describe, expect, it } from 'vitest';
import { buildOperator } from '../build.js';
import { parseOperatorDescription, type OperatorDescription } from '../description.js';
import { MT19937 } from '../mt19937.js';
import { adjointMismatch, denseColumns, directDft, maxAbsDiff, powerIterationNorm, randomComplex } from './helpers.js';

const BASES = ['identity', 'dft', 'dct2', 'haar', 'db4'] as const;

/** Every operator kind, with every basis where the kind takes one, at power-of-two and other sizes. */
const DESCRIPTIONS: OperatorDescription[] = [
  ...BASES.flatMap((kind) => [
    { kind: 'sampling', n: 64, samples: { law: 'uniform', m: 20, seed: 1 }, basis: { kind } } as const,
    { kind: 'partial_dft', n: 64, samples: { law: 'variable_density', m: 24, seed: 2 }, basis: { kind } } as const,
    { kind: 'gaussian', rows: 16, cols: 48, seed: 3, basis: { kind } } as const,
    { kind: 'bernoulli', rows: 20, cols: 32, seed: 4, basis: { kind } } as const,
  ]),
  { kind: 'sampling', n: 300, samples: { law: 'uniform', m: 90, seed: 5 }, basis: { kind: 'dft' } },
  { kind: 'partial_dft', n: 300, samples: { law: 'explicit', indices: [7, 0, 299, 150, 33] } },
  { kind: 'partial_dft', n: 96, samples: { law: 'uniform', m: 30, seed: 6 }, basis: { kind: 'haar', levels: 5 } },
  { kind: 'gabor', n: 16, window: { kind: 'steinhaus', seed: 7 } },
  { kind: 'gabor', n: 12, window: { kind: 'rademacher', seed: 8 } },
  { kind: 'gabor', n: 32, window: { kind: 'gaussian', seed: 9 }, grid: { delays: 5, dopplerFrom: -4, dopplerTo: 6 } },
  { kind: 'gabor', n: 6, window: { kind: 'explicit', re: [1, 0, 2, 0, 0, -1], im: [0, 1, 0, 0, 3, 0] } },
  { kind: 'matrix', rows: 3, cols: 4, re: [1, 2, 0, -1, 0, 3, 1, 1, 2, 0, 0, 5] },
  { kind: 'matrix', rows: 4, cols: 2, re: [1, 2, 0, -1, 0, 3, 1, 1], im: [0, 1, 2, 0, -1, 0, 0, 2], basis: { kind: 'dft' } },
];

const label = (d: OperatorDescription) => JSON.stringify(d).slice(0, 110);

describe('operators built from descriptions', () => {
  it.each(DESCRIPTIONS.map((d) => [label(d), d] as const))(
    'satisfies the adjoint identity <Ax, y> = <x, Aᴴy> to 1e-10: %s',
    (_, desc) => {
      // Definition of the adjoint (closed form): y^H (A x) = (A^H y)^H x for all x, y.
      const op = buildOperator(parseOperatorDescription(desc));
      const rng = new MT19937(99);
      for (let trial = 0; trial < 3; trial++) expect(adjointMismatch(op, rng)).toBeLessThan(1e-10);
    },
  );

  it.each(DESCRIPTIONS.map((d) => [label(d), d] as const))(
    'never lets power iteration exceed its norm bound: %s',
    (_, desc) => {
      // ‖A‖₂ ≥ every power-iteration estimate ‖A x_k‖ with ‖x_k‖ = 1 (Rayleigh quotient bound;
      // Golub & Van Loan, Matrix Computations, §8.2). Slack 1e-12 covers rounding in apply.
      const op = buildOperator(parseOperatorDescription(desc));
      const estimate = powerIterationNorm(op, 200, new MT19937(5));
      expect(estimate).toBeLessThanOrEqual(op.normBound * (1 + 1e-12));
    },
  );

  it('reaches the exact norm 1 of orthonormal-row operators and √n of a full Gabor grid', () => {
    // Closed forms: rows of a unitary matrix have ‖A‖ = 1; the full Gabor system of a unit-norm
    // window is a tight frame with A Aᴴ = n·I (derived in docs/operators.md).
    const dft = buildOperator({ kind: 'partial_dft', n: 64, samples: { law: 'uniform', m: 10, seed: 3 } });
    expect(dft.normBound).toBe(1);
    expect(powerIterationNorm(dft, 20, new MT19937(1))).toBeCloseTo(1, 12);
    const gabor = buildOperator({ kind: 'gabor', n: 16, window: { kind: 'gaussian', seed: 1 } });
    expect(gabor.normBound).toBeCloseTo(4, 10);
    expect(powerIterationNorm(gabor, 30, new MT19937(1))).toBeCloseTo(4, 10);
  });

  it.each([64, 300])('partial DFT rows are rows of the unitary DFT matrix (n = %i)', (n) => {
    // Reference: direct O(n²) DFT sum with unitary scaling n^{−1/2}.
    const op = buildOperator({ kind: 'partial_dft', n, samples: { law: 'uniform', m: 17, seed: 4 } });
    const indices = (op as unknown as { indices: Int32Array }).indices;
    const x = randomComplex(n, new MT19937(8));
    const full = directDft(x, -1, 1 / Math.sqrt(n));
    const out = new Float64Array(2 * op.rows);
    op.apply(x, out);
    const expected = Array.from(indices).flatMap((k) => [full[2 * k]!, full[2 * k + 1]!]);
    expect(maxAbsDiff(out, expected)).toBeLessThan(1e-12);
  });

  it.each([64, 300])('time samples with a DFT basis sample the inverse unitary DFT of the coefficients (n = %i)', (n) => {
    // Reference: x = F^H c by the direct sum x[t] = n^{−1/2} Σ_k c[k] e^{+2πi kt/n}, then x at Ω.
    const op = buildOperator({ kind: 'sampling', n, samples: { law: 'uniform', m: 23, seed: 5 }, basis: { kind: 'dft' } });
    const indices = (op as unknown as { indices: Int32Array }).indices;
    const c = randomComplex(n, new MT19937(9));
    const x = directDft(c, 1, 1 / Math.sqrt(n));
    const out = new Float64Array(2 * op.rows);
    op.apply(c, out);
    const expected = Array.from(indices).flatMap((t) => [x[2 * t]!, x[2 * t + 1]!]);
    expect(maxAbsDiff(out, expected)).toBeLessThan(1e-12);
  });

  it('keeps explicit sample indices in the order given and puts row i at index ω_i', () => {
    const op = buildOperator({ kind: 'sampling', n: 10, samples: { law: 'explicit', indices: [9, 2, 5] } });
    const x = new Float64Array(20);
    for (let t = 0; t < 10; t++) x[2 * t] = t;
    const out = new Float64Array(6);
    op.apply(x, out);
    expect(Array.from(out)).toEqual([9, 0, 2, 0, 5, 0]);
    expect(op.real).toBe(true);
  });

  it('composes a basis as A = Φ ∘ synthesis: A c equals Φ applied to the synthesised signal', () => {
    // Definition of the composition, checked against two separately built parts.
    const phi = buildOperator({ kind: 'gaussian', rows: 12, cols: 32, seed: 21 });
    const composed = buildOperator({ kind: 'gaussian', rows: 12, cols: 32, seed: 21, basis: { kind: 'haar' } });
    const haarColumns = denseColumns(
      buildOperator({ kind: 'sampling', n: 32, samples: { law: 'explicit', indices: [...Array(32).keys()] }, basis: { kind: 'haar' } }),
    );
    const c = randomComplex(32, new MT19937(3));
    const x = new Float64Array(64);
    haarColumns.forEach((col, j) => {
      for (let i = 0; i < 64; i += 2) {
        x[i] += col[i]! * c[2 * j]! - col[i + 1]! * c[2 * j + 1]!;
        x[i + 1] += col[i]! * c[2 * j + 1]! + col[i + 1]! * c[2 * j]!;
      }
    });
    const expected = new Float64Array(24);
    phi.apply(x, expected);
    const out = new Float64Array(24);
    composed.apply(c, out);
    expect(maxAbsDiff(out, expected)).toBeLessThan(1e-12);
    expect(composed.real).toBe(true);
    expect(composed.normBound).toBe(phi.normBound);
  });

  it('draws Gaussian entries with variance 1/rows and Bernoulli entries ±1/√rows', () => {
    // Definitions of the ensembles (common practice, no source for the 1/rows scaling).
    const rows = 64;
    const cols = 1024;
    const gauss = denseColumns(buildOperator({ kind: 'gaussian', rows, cols, seed: 5 }));
    let sum = 0;
    let sum2 = 0;
    for (const col of gauss) {
      for (let i = 0; i < rows; i++) {
        sum += col[2 * i]!;
        sum2 += col[2 * i]! ** 2;
        expect(col[2 * i + 1]).toBe(0);
      }
    }
    const count = rows * cols;
    expect(Math.abs(sum / count)).toBeLessThan(4 / Math.sqrt(count * rows)); // mean 0 within 4σ
    expect(sum2 / count).toBeGreaterThan((1 / rows) * 0.97);
    expect(sum2 / count).toBeLessThan((1 / rows) * 1.03);
    const bern = denseColumns(buildOperator({ kind: 'bernoulli', rows, cols: 4, seed: 5 }));
    for (const col of bern) for (let i = 0; i < rows; i++) expect(Math.abs(col[2 * i]!)).toBe(1 / Math.sqrt(rows));
  });

  it('exposes the description it was built from', () => {
    const desc = parseOperatorDescription({ kind: 'partial_dft', n: 8, samples: { law: 'uniform', m: 3, seed: 0 } });
    expect(buildOperator(desc).description).toBe(desc);
    const raw = { kind: 'partial_dft', n: 8, samples: { law: 'uniform', m: 3, seed: 0 } } as const;
    expect(buildOperator(raw).description).toEqual(raw);
  });
});
