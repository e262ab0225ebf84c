import { describe, expect, it } from 'vitest';
import { familyFor, recoverability } from '../index.js';
import table from '../phase-table.json' with { type: 'json' };

type Curve = { rho90: number[]; rho50: number[]; rho10: number[] };
const families = table.families as unknown as Record<string, { delta: number[]; l1: Curve; reweighted_l1: Curve }>;

describe('recoverability', () => {
  it('ships a measured table for Gaussian and Gabor operators with ordered levels', () => {
    expect(Object.keys(families)).toEqual(expect.arrayContaining(['gaussian', 'gabor']));
    for (const f of Object.values(families)) {
      for (let i = 1; i < f.delta.length; i++) expect(f.delta[i]!).toBeGreaterThan(f.delta[i - 1]!);
      for (const curve of [f.l1, f.reweighted_l1]) {
        for (let i = 0; i < f.delta.length; i++) {
          expect(curve.rho90[i]!).toBeLessThanOrEqual(curve.rho50[i]!);
          expect(curve.rho50[i]!).toBeLessThanOrEqual(curve.rho10[i]!);
        }
      }
    }
  });

  // Donoho & Tanner (J. Amer. Math. Soc. 22(1), 2009; Phil. Trans. R. Soc. A 367, 2009): for real
  // Gaussian matrices the 50 % line of l1 recovery approaches the weak threshold ρ_W(δ), about
  // 0.38 at δ = 0.5 and 0.27 at δ = 0.25 (values from memory); at n = 100 the measured line must
  // lie near it.
  it('puts the Gaussian l1 transition near the Donoho–Tanner weak threshold', () => {
    expect(recoverability('gaussian', 50, 100, 1).rho50).toBeGreaterThan(0.31);
    expect(recoverability('gaussian', 50, 100, 1).rho50).toBeLessThan(0.45);
    expect(recoverability('gaussian', 25, 100, 1).rho50).toBeGreaterThan(0.2);
    expect(recoverability('gaussian', 25, 100, 1).rho50).toBeLessThan(0.34);
  });

  it('moves the transition up with reweighted l1', () => {
    for (const f of Object.values(families)) {
      const gain = f.delta.map((_, i) => f.reweighted_l1.rho50[i]! - f.l1.rho50[i]!);
      expect(gain.reduce((a, b) => a + b, 0) / gain.length).toBeGreaterThan(0.03);
    }
  });

  it('gives a verdict from ρ against the measured levels', () => {
    const safe = recoverability('gaussian', 50, 100, 2);
    expect(safe.verdict).toBe('safe');
    expect(safe.delta).toBe(0.5);
    expect(safe.rho).toBe(0.04);
    expect(safe.margin).toBeCloseTo(1 - 0.04 / safe.rho50, 12);
    expect(recoverability('gaussian', 50, 100, 45).verdict).toBe('unlikely');
    expect(recoverability('gaussian', 50, 100, 45).margin).toBeLessThan(0);
    const r = recoverability('gaussian', 50, 100, 1);
    const between = Math.round(((r.rho90 + r.rho10) / 2) * 50);
    if (between / 50 > r.rho90 && between / 50 <= r.rho10) expect(recoverability('gaussian', 50, 100, between).verdict).toBe('marginal');
    expect(recoverability('gabor', 64, 64, 30).verdict).toBe('safe'); // δ ≥ 1: determined
    expect(recoverability('gaussian', 20, 100, 0).verdict).toBe('safe');
  });

  it('is cautious below the measured range of δ', () => {
    const tiny = recoverability('gaussian', 2, 1000, 1);
    expect(tiny.rho50).toBeLessThan(recoverability('gaussian', 10, 100, 1).rho50);
    expect(tiny.verdict).not.toBe('safe');
  });

  it('reads operator kinds as families', () => {
    expect(familyFor('bernoulli')).toBe('gaussian');
    expect(familyFor('matrix')).toBe('gaussian');
    expect(familyFor('gabor')).toBe('gabor');
    expect(familyFor('sampling')).toBe('dft');
    expect(familyFor('partial_dft')).toBe('dft');
    expect(recoverability('sampling', 30, 300, 5).family).toBe('dft');
  });

  // Consistency with the recovery statistics (recovery.test.ts): 5 of 300 from 30 samples is
  // recovered nearly always, 10 of 300 rarely.
  it('agrees with the measured recovery of DFT-sparse signals', () => {
    expect(recoverability('sampling', 30, 300, 5).verdict).not.toBe('unlikely');
    expect(recoverability('sampling', 30, 300, 10).verdict).not.toBe('safe');
  });
});
