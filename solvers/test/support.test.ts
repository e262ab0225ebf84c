import { describe, expect, it } from 'vitest';
import { MT19937 } from '../../operators/index.js';
import { detectSupport, selectLargest, supportChange, unionSorted } from '../support.js';

describe('support helpers', () => {
  // Definition: the k largest by magnitude, ties to the lower index; checked against a full sort.
  it('selects the k largest entries like a full sort would, ties to the lower index', () => {
    const rng = new MT19937(1);
    for (let trial = 0; trial < 50; trial++) {
      const n = 1 + Math.floor(rng.nextDouble() * 60);
      const mag = new Float64Array(n);
      // Few distinct values, so ties are common.
      for (let j = 0; j < n; j++) mag[j] = Math.floor(rng.nextDouble() * 5);
      const k = Math.floor(rng.nextDouble() * (n + 1));
      const idx = new Int32Array(n);
      selectLargest(mag, n, k, idx);
      const expected = [...Array(n).keys()]
        .sort((a, b) => mag[b]! - mag[a]! || a - b)
        .slice(0, k)
        .sort((a, b) => a - b);
      expect([...idx.subarray(0, k)]).toEqual(expected);
    }
  });

  it('detects the support relative to the peak', () => {
    const x = new Float64Array([0, 0, 3, 4, 0, 0.006, 1e-3, 0, 0, 0]); // moduli 0, 5, 0.006, 0.001, 0
    const out = new Int32Array(5);
    expect([...out.subarray(0, detectSupport(x, 1e-3, out))]).toEqual([1, 2]);
    expect([...out.subarray(0, detectSupport(x, 0, out))]).toEqual([1, 2, 3]);
    expect(detectSupport(new Float64Array(4), 1e-3, out)).toBe(0);
  });

  it('merges sorted supports and counts what moved', () => {
    const out = new Int32Array(8);
    const a = new Int32Array([1, 4, 7]);
    const b = new Int32Array([2, 4, 9]);
    expect([...out.subarray(0, unionSorted(a, 3, b, 3, out))]).toEqual([1, 2, 4, 7, 9]);
    expect(supportChange(a, b)).toEqual({ added: 2, removed: 2 });
    expect(supportChange(undefined, b)).toEqual({ added: 0, removed: 0 });
    expect(supportChange(a, a)).toEqual({ added: 0, removed: 0 });
    expect(supportChange(new Int32Array(0), b)).toEqual({ added: 3, removed: 0 });
  });
});
