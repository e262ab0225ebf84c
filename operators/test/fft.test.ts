import { describe, expect, it } from 'vitest';
import { fftPlan } from '../fft.js';
import { MT19937 } from '../mt19937.js';
import { directDft, maxAbsDiff, randomComplex } from './helpers.js';

// Lengths: powers of two (fft.js) and others (Bluestein), including primes and the solver tests' 300.
const LENGTHS = [1, 2, 3, 4, 5, 7, 8, 12, 16, 31, 64, 100, 128, 300, 256];

describe('FFT backend', () => {
  it.each(LENGTHS)('forward transform of length %i equals the direct DFT sum', (n) => {
    // Reference: the DFT's defining sum X[k] = Σ_t x[t] e^{−2πi kt/n} (closed form, evaluated directly).
    const rng = new MT19937(n);
    const x = randomComplex(n, rng);
    const out = new Float64Array(2 * n);
    fftPlan(n).forward(x, out);
    expect(maxAbsDiff(out, directDft(x, -1, 1))).toBeLessThan(1e-11 * n);
  });

  it.each(LENGTHS)('inverse transform of length %i equals the direct sum with e^{+2πi kt/n} / n', (n) => {
    const rng = new MT19937(1000 + n);
    const x = randomComplex(n, rng);
    const out = new Float64Array(2 * n);
    fftPlan(n).inverse(x, out);
    expect(maxAbsDiff(out, directDft(x, 1, 1 / n))).toBeLessThan(1e-12 * n);
  });

  it.each([8, 300])('applies an explicit scale and leaves its input untouched (n = %i)', (n) => {
    const rng = new MT19937(3);
    const x = randomComplex(n, rng);
    const copy = x.slice();
    const out = new Float64Array(2 * n);
    const plan = fftPlan(n);
    plan.forward(x, out, 0.5);
    expect(maxAbsDiff(out, directDft(x, -1, 0.5))).toBeLessThan(1e-10);
    plan.inverse(x, out, 2);
    expect(maxAbsDiff(out, directDft(x, 1, 2))).toBeLessThan(1e-10);
    expect(x).toEqual(copy);
  });

  it('round-trips at n = 4096 and n = 300 to rounding error', () => {
    for (const n of [4096, 300]) {
      const rng = new MT19937(11);
      const x = randomComplex(n, rng);
      const spec = new Float64Array(2 * n);
      const back = new Float64Array(2 * n);
      fftPlan(n).forward(x, spec);
      fftPlan(n).inverse(spec, back);
      expect(maxAbsDiff(back, x)).toBeLessThan(1e-12);
    }
  });

  it('caches one plan per length and rejects invalid lengths', () => {
    expect(fftPlan(300)).toBe(fftPlan(300));
    for (const bad of [0, -4, 2.5]) expect(() => fftPlan(bad)).toThrow(RangeError);
  });
});
