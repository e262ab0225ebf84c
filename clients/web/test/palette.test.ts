import { describe, expect, it } from 'vitest';
import { buildHeatTable, HEAT_STOPS, heatIndex } from '../src/palette.js';

/**
 * Relative luminance of an sRGB colour, as defined in WCAG 2.1 ("relative luminance",
 * with the sRGB transfer function of IEC 61966-2-1).
 */
function relativeLuminance(r: number, g: number, b: number): number {
  const lin = (c: number) => {
    const s = c / 255;
    return s <= 0.04045 ? s / 12.92 : ((s + 0.055) / 1.055) ** 2.4;
  };
  return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b);
}

describe('heat-map colour ramp', () => {
  const table = buildHeatTable();

  it('starts and ends on the first and last stops', () => {
    expect(Array.from(table.subarray(0, 3))).toEqual([...HEAT_STOPS[0]!]);
    expect(Array.from(table.subarray(765, 768))).toEqual([...HEAT_STOPS[HEAT_STOPS.length - 1]!]);
  });

  // A stronger cell must always read darker, or the map would lie about which reflector is
  // strongest: luminance falls strictly along the ramp.
  it('gets strictly darker from weak to strong', () => {
    for (let i = 1; i < 256; i++) {
      const before = relativeLuminance(table[3 * i - 3]!, table[3 * i - 2]!, table[3 * i - 1]!);
      const now = relativeLuminance(table[3 * i]!, table[3 * i + 1]!, table[3 * i + 2]!);
      expect(now, `entry ${i}`).toBeLessThan(before);
    }
  });

  it('maps magnitudes relative to the peak onto the table', () => {
    expect(heatIndex(0, 2)).toBe(0);
    expect(heatIndex(2, 2)).toBe(255);
    expect(heatIndex(1, 2)).toBe(128);
    expect(heatIndex(1, 0)).toBe(0); // an empty frame
  });
});
