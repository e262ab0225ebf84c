import { describe, expect, it } from 'vitest';
import { DB4_FILTER, HAAR_FILTER, defaultWaveletLevels, makeBasis, type BasisKind } from '../bases/index.js';
import { MT19937 } from '../mt19937.js';
import type { UnitaryBasis } from '../types.js';
import { directDft, innerProduct, maxAbsDiff, randomComplex } from './helpers.js';

function unit(n: number, j: number): Float64Array {
  const e = new Float64Array(2 * n);
  e[2 * j] = 1;
  return e;
}

/** Analysis matrix columns Ψᴴ e_j and synthesis columns, for an orthonormality check. */
function maxGramDeviation(basis: UnitaryBasis, which: 'analyze' | 'synthesize'): number {
  const n = basis.size;
  const cols = Array.from({ length: n }, (_, j) => {
    const out = new Float64Array(2 * n);
    basis[which](unit(n, j), out);
    return out;
  });
  let worst = 0;
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      const [re, im] = innerProduct(cols[i]!, cols[j]!);
      worst = Math.max(worst, Math.hypot(re - (i === j ? 1 : 0), im));
    }
  }
  return worst;
}

const CASES: Array<[BasisKind, number, number | undefined]> = [
  ['identity', 12, undefined],
  ['dft', 12, undefined],
  ['dft', 16, undefined],
  ['dct2', 1, undefined],
  ['dct2', 2, undefined],
  ['dct2', 7, undefined],
  ['dct2', 16, undefined],
  ['dct2', 30, undefined],
  ['haar', 2, undefined],
  ['haar', 32, undefined],
  ['haar', 24, 3],
  ['haar', 64, 2],
  ['db4', 2, undefined],
  ['db4', 4, 2],
  ['db4', 32, undefined],
  ['db4', 32, 5],
  ['db4', 48, 4],
];

describe('unitary bases', () => {
  it.each(CASES)('%s (n = %i, levels %s) is orthonormal and synthesis inverts analysis', (kind, n, levels) => {
    // Definition of a unitary matrix: columns orthonormal (Ψᴴ Ψ = I) and Ψ Ψᴴ = I.
    const basis = makeBasis(kind, n, levels);
    expect(maxGramDeviation(basis, 'analyze')).toBeLessThan(1e-12);
    expect(maxGramDeviation(basis, 'synthesize')).toBeLessThan(1e-12);
    const rng = new MT19937(n);
    const x = randomComplex(n, rng);
    const c = new Float64Array(2 * n);
    const back = new Float64Array(2 * n);
    basis.analyze(x, c);
    basis.synthesize(c, back);
    expect(maxAbsDiff(back, x)).toBeLessThan(1e-12);
  });

  it.each([5, 16, 300])('dft analysis is the unitary DFT and synthesis its inverse (n = %i)', (n) => {
    // Reference: the DFT's defining sum, scaled by n^{−1/2} (unitary convention).
    const basis = makeBasis('dft', n);
    const x = randomComplex(n, new MT19937(5));
    const out = new Float64Array(2 * n);
    basis.analyze(x, out);
    expect(maxAbsDiff(out, directDft(x, -1, 1 / Math.sqrt(n)))).toBeLessThan(1e-11);
    basis.synthesize(x, out);
    expect(maxAbsDiff(out, directDft(x, 1, 1 / Math.sqrt(n)))).toBeLessThan(1e-11);
  });

  it.each([1, 2, 3, 8, 13, 64, 100])('dct2 analysis equals the orthonormal DCT-II formula (n = %i)', (n) => {
    // Reference: DCT-II definition (Ahmed, Natarajan & Rao, "Discrete Cosine Transform",
    // IEEE Trans. Computers C-23, 1974) with orthonormal scaling s_0 = √(1/n), s_k = √(2/n)
    // (common practice, no source for the scaling's name).
    const x = randomComplex(n, new MT19937(n + 7));
    const expected = new Float64Array(2 * n);
    for (let k = 0; k < n; k++) {
      const s = Math.sqrt((k === 0 ? 1 : 2) / n);
      for (let t = 0; t < n; t++) {
        const w = s * Math.cos((Math.PI * (2 * t + 1) * k) / (2 * n));
        expected[2 * k] += w * x[2 * t]!;
        expected[2 * k + 1] += w * x[2 * t + 1]!;
      }
    }
    const out = new Float64Array(2 * n);
    makeBasis('dct2', n).analyze(x, out);
    expect(maxAbsDiff(out, expected)).toBeLessThan(1e-12 * Math.max(1, n));
  });

  it.each([
    [16, 4],
    [24, 3],
    [8, 1],
  ])('haar synthesis columns are the Haar scaling and wavelet functions (n = %i, %i levels)', (n, levels) => {
    // Reference: Haar's orthonormal system (Haar, Math. Ann. 69, 1910), discretised:
    // φ_{L,i} = 2^{−L/2} on [i·2^L, (i+1)·2^L); ψ_{j,i} = 2^{−j/2} on the first half of
    // [i·2^j, (i+1)·2^j) and −2^{−j/2} on the second. Coefficient layout [a_L, d_L, …, d_1]:
    // a_L at 0..n/2^L − 1, d_j at n/2^j..n/2^{j−1} − 1 (Mallat ordering, common practice).
    const basis = makeBasis('haar', n, levels);
    const expectColumn = (index: number, f: (t: number) => number) => {
      const out = new Float64Array(2 * n);
      basis.synthesize(unit(n, index), out);
      const expected = new Float64Array(2 * n);
      for (let t = 0; t < n; t++) expected[2 * t] = f(t);
      expect(maxAbsDiff(out, expected)).toBeLessThan(1e-14);
    };
    const coarse = 2 ** levels;
    for (let i = 0; i < n / coarse; i++) {
      expectColumn(i, (t) => (Math.floor(t / coarse) === i ? coarse ** -0.5 : 0));
    }
    for (let j = 1; j <= levels; j++) {
      const width = 2 ** j;
      for (let i = 0; i < n / width; i++) {
        expectColumn(n / width + i, (t) => {
          if (Math.floor(t / width) !== i) return 0;
          return (t % width < width / 2 ? 1 : -1) * width ** -0.5;
        });
      }
    }
  });

  it('uses the published Daubechies-4 filter with its defining properties', () => {
    // Reference: Daubechies, "Orthonormal bases of compactly supported wavelets", Comm. Pure
    // Appl. Math. 41(7), 1988: h = [1+√3, 3+√3, 3−√3, 1−√3]/(4√2); Σh = √2, Σh² = 1,
    // Σ h_k h_{k+2} = 0, and the high-pass g_k = (−1)^k h_{3−k} has two vanishing moments.
    const h = Array.from(DB4_FILTER);
    expect(h[0]).toBeCloseTo(0.4829629131445341, 15); // from memory (commonly tabulated value)
    expect(h.reduce((a, b) => a + b, 0)).toBeCloseTo(Math.SQRT2, 14);
    expect(h.reduce((a, b) => a + b * b, 0)).toBeCloseTo(1, 14);
    expect(h[0]! * h[2]! + h[1]! * h[3]!).toBeCloseTo(0, 15);
    const g = h.map((_, k) => (k % 2 === 0 ? 1 : -1) * h[3 - k]!);
    expect(g.reduce((a, b) => a + b, 0)).toBeCloseTo(0, 14);
    expect(g.reduce((a, b, k) => a + k * b, 0)).toBeCloseTo(0, 14);
    expect(Array.from(HAAR_FILTER)).toEqual([Math.SQRT1_2, Math.SQRT1_2]);
  });

  it('db4 details of a linear ramp vanish away from the periodic wrap (two vanishing moments)', () => {
    // Reference: vanishing moments (Daubechies 1988): detail filters annihilate polynomials of degree ≤ 1.
    const n = 32;
    const x = new Float64Array(2 * n);
    for (let t = 0; t < n; t++) {
      x[2 * t] = 3 + 0.5 * t;
      x[2 * t + 1] = -2 * t;
    }
    const c = new Float64Array(2 * n);
    makeBasis('db4', n, 1).analyze(x, c);
    // d_1 sits at n/2..n−1; detail i uses x[2i..2i+3], which wraps only for the last i.
    for (let i = 0; i < n / 2 - 1; i++) {
      expect(Math.abs(c[2 * (n / 2 + i)]!)).toBeLessThan(1e-12);
      expect(Math.abs(c[2 * (n / 2 + i) + 1]!)).toBeLessThan(1e-12);
    }
    expect(Math.abs(c[2 * (n - 1)]!)).toBeGreaterThan(1);
  });

  it('db4 one level equals the periodic filter-bank formula', () => {
    // Reference: a[i] = Σ_k h_k x[(2i+k) mod n], d[i] = Σ_k g_k x[(2i+k) mod n] (definition in docs/operators.md).
    const n = 12;
    const x = randomComplex(n, new MT19937(12));
    const c = new Float64Array(2 * n);
    makeBasis('db4', n, 1).analyze(x, c);
    const h = DB4_FILTER;
    const g = [h[3]!, -h[2]!, h[1]!, -h[0]!];
    const expected = new Float64Array(2 * n);
    for (let i = 0; i < n / 2; i++) {
      for (let k = 0; k < 4; k++) {
        const t = (2 * i + k) % n;
        for (const part of [0, 1]) {
          expected[2 * i + part] += h[k]! * x[2 * t + part]!;
          expected[2 * (n / 2 + i) + part] += g[k]! * x[2 * t + part]!;
        }
      }
    }
    expect(maxAbsDiff(c, expected)).toBeLessThan(1e-14);
  });

  it('picks documented default wavelet depths', () => {
    expect(defaultWaveletLevels('haar', 64)).toBe(6);
    expect(defaultWaveletLevels('haar', 24)).toBe(3);
    expect(defaultWaveletLevels('db4', 64)).toBe(4);
    expect(defaultWaveletLevels('db4', 2)).toBe(1);
    expect(() => makeBasis('haar', 24, 4)).toThrow(RangeError);
  });
});
