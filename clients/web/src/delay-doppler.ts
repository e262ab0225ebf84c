/**
 * The delay-Doppler grid of a Gabor stream and how its coefficient columns map onto it.
 *
 * Column j of a Gabor operator is the probe shifted by delay k and modulated by Doppler l:
 * j = k·L + (l − dopplerFrom), k ∈ 0..delays−1, l ∈ dopplerFrom..dopplerTo,
 * L = dopplerTo − dopplerFrom + 1 (docs/operators.md).
 */
export interface DelayDopplerGrid {
  /** Number of delay bins K. */
  readonly delays: number;
  readonly dopplerFrom: number;
  readonly dopplerTo: number;
}

export interface GridCell {
  delay: number;
  doppler: number;
}

export function dopplerCount(grid: DelayDopplerGrid): number {
  return grid.dopplerTo - grid.dopplerFrom + 1;
}

export function cellCount(grid: DelayDopplerGrid): number {
  return grid.delays * dopplerCount(grid);
}

export function cellOfColumn(grid: DelayDopplerGrid, column: number): GridCell {
  const L = dopplerCount(grid);
  return { delay: Math.floor(column / L), doppler: grid.dopplerFrom + (column % L) };
}

export function columnOfCell(grid: DelayDopplerGrid, delay: number, doppler: number): number {
  return delay * dopplerCount(grid) + (doppler - grid.dopplerFrom);
}

/** The cell of largest magnitude (the first one on ties), or null when the map is all zero. */
export function brightestCell(grid: DelayDopplerGrid, magnitudes: Float64Array): (GridCell & { magnitude: number }) | null {
  let best = -1;
  let bestValue = 0;
  for (let j = 0; j < magnitudes.length; j++) {
    if (magnitudes[j]! > bestValue) {
      bestValue = magnitudes[j]!;
      best = j;
    }
  }
  return best < 0 ? null : { ...cellOfColumn(grid, best), magnitude: bestValue };
}
