import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { TrendRing } from '../src/ring.js';

describe('TrendRing', () => {
  // Model check: the ring must return exactly what a plain list of the last `capacity` pushes,
  // filtered by time, would (a definition, checked over random push sequences).
  it('returns the last samples newer than the cut-off, oldest first', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 12 }),
        fc.array(fc.tuple(fc.integer({ min: 0, max: 100 }), fc.double({ noNaN: true })), { maxLength: 40 }),
        fc.integer({ min: -1, max: 101 }),
        (capacity, pushes, since) => {
          const ring = new TrendRing(capacity, 2);
          for (const [t, v] of pushes) ring.push(t, [v, -v]);
          const kept = pushes.slice(-capacity).filter(([t]) => t >= since);
          const times = new Float64Array(capacity);
          const columns = [new Float64Array(capacity), new Float64Array(capacity)];
          const n = ring.copyWindow(since, times, columns);
          expect(n).toBe(kept.length);
          expect(Array.from(times.subarray(0, n))).toEqual(kept.map(([t]) => t));
          expect(Array.from(columns[0]!.subarray(0, n))).toEqual(kept.map(([, v]) => v));
          expect(Array.from(columns[1]!.subarray(0, n))).toEqual(kept.map(([, v]) => -v));
          expect(ring.size).toBe(Math.min(capacity, pushes.length));
        },
      ),
    );
  });

  it('refuses a capacity that is not a positive integer', () => {
    expect(() => new TrendRing(0, 1)).toThrow(/capacity/);
    expect(() => new TrendRing(2.5, 1)).toThrow(/capacity/);
  });
});
