/**
 * The heat-map colour ramp of the dashboard: from the page's paper tone through sand and rust
 * to a deep plum, so stronger reflectors read as more ink on the page. The stops are ours.
 */
export const HEAT_STOPS: ReadonlyArray<readonly [number, number, number]> = [
  [0xf5, 0xf1, 0xe6],
  [0xe4, 0xcf, 0x9b],
  [0xcf, 0x8e, 0x4f],
  [0xa4, 0x47, 0x2f],
  [0x5a, 0x1c, 0x3a],
  [0x24, 0x0d, 0x26],
];

/** A 256-entry RGB lookup table (768 bytes) sampled from the ramp, built once. */
export function buildHeatTable(): Uint8ClampedArray {
  const table = new Uint8ClampedArray(256 * 3);
  const segments = HEAT_STOPS.length - 1;
  for (let i = 0; i < 256; i++) {
    const t = (i / 255) * segments;
    const s = Math.min(Math.floor(t), segments - 1);
    const f = t - s;
    const a = HEAT_STOPS[s]!;
    const b = HEAT_STOPS[s + 1]!;
    for (let ch = 0; ch < 3; ch++) table[3 * i + ch] = Math.round(a[ch]! + (b[ch]! - a[ch]!) * f);
  }
  return table;
}

/** Index into the table for a magnitude relative to the frame's peak (0 → paper, 1 → plum). */
export function heatIndex(value: number, peak: number): number {
  if (!(peak > 0) || !(value > 0)) return 0;
  return Math.min(255, Math.round((value / peak) * 255));
}
