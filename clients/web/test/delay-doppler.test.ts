import { describe, expect, it } from 'vitest';
import { brightestCell, cellCount, cellOfColumn, columnOfCell, type DelayDopplerGrid } from '../src/delay-doppler.js';
import { fillMagnitudes } from '../src/magnitudes.js';

// The column order of the Gabor operator, by definition (docs/operators.md):
// j = k·L + (l − dopplerFrom), L = dopplerTo − dopplerFrom + 1.
describe('delay-Doppler column mapping', () => {
  const grids: DelayDopplerGrid[] = [
    { delays: 16, dopplerFrom: 0, dopplerTo: 15 }, // the full grid of n = 16
    { delays: 8, dopplerFrom: -3, dopplerTo: 4 }, // a band of Doppler bins around zero
    { delays: 5, dopplerFrom: 2, dopplerTo: 2 }, // a single Doppler bin
  ];

  it('maps every cell to the column the definition gives, and back', () => {
    for (const grid of grids) {
      const L = grid.dopplerTo - grid.dopplerFrom + 1;
      const seen = new Set<number>();
      for (let k = 0; k < grid.delays; k++) {
        for (let l = grid.dopplerFrom; l <= grid.dopplerTo; l++) {
          const j = columnOfCell(grid, k, l);
          expect(j).toBe(k * L + (l - grid.dopplerFrom));
          expect(cellOfColumn(grid, j)).toEqual({ delay: k, doppler: l });
          seen.add(j);
        }
      }
      // A bijection onto 0..K·L−1.
      expect(seen.size).toBe(cellCount(grid));
      expect(Math.min(...seen)).toBe(0);
      expect(Math.max(...seen)).toBe(cellCount(grid) - 1);
    }
  });

  it('finds the strongest cell of a sparse coefficient set', () => {
    const grid = grids[1]!;
    const columns = [columnOfCell(grid, 6, -2), columnOfCell(grid, 1, 3), columnOfCell(grid, 4, 0)];
    const indices = Uint32Array.from(columns);
    // Complex values; magnitudes 0.5, 1.3 (= |1.2 + 0.5i|), 0.9 (= |−0.9i|).
    const values = Float64Array.from([0.3, 0.4, 1.2, 0.5, 0, -0.9]);
    const magnitudes = new Float64Array(cellCount(grid));
    fillMagnitudes(indices, values, magnitudes);
    expect(magnitudes[columns[0]!]).toBeCloseTo(0.5, 15);
    expect(magnitudes[columns[1]!]).toBeCloseTo(1.3, 15);
    expect(magnitudes[columns[2]!]).toBeCloseTo(0.9, 15);
    expect(brightestCell(grid, magnitudes)).toMatchObject({ delay: 1, doppler: 3 });
  });

  it('reports no peak for an all-zero frame and ignores columns outside the grid', () => {
    const grid = grids[2]!;
    const magnitudes = new Float64Array(cellCount(grid));
    fillMagnitudes(Uint32Array.from([99]), Float64Array.from([5, 5]), magnitudes);
    expect(brightestCell(grid, magnitudes)).toBeNull();
  });
});
