import { describe, expect, it } from 'vitest';

import {
  COLOUR_MAP_NAMES,
  COLOUR_MAP_SIZE,
  DIVERGING_COLOUR_MAP_NAMES,
  colourMapTable,
} from '@/viewer/colour-maps';
import { srgb8ToLab } from '@/viewer/colour-science';

/** L*, a*, b* of each entry, recomputed from the 8-bit table (IEC 61966-2-1 sRGB → CIE 15:2004 CIELAB, D65). */
function labOf(name: (typeof DIVERGING_COLOUR_MAP_NAMES)[number]) {
  const table = colourMapTable(name);
  return Array.from({ length: COLOUR_MAP_SIZE }, (_, i) =>
    srgb8ToLab(table[3 * i]!, table[3 * i + 1]!, table[3 * i + 2]!),
  );
}

describe('diverging colour maps', () => {
  it('are kept apart from the sequential maps', () => {
    expect(DIVERGING_COLOUR_MAP_NAMES).toContain('seesaw');
    for (const name of DIVERGING_COLOUR_MAP_NAMES) expect(COLOUR_MAP_NAMES).not.toContain(name);
  });

  for (const name of DIVERGING_COLOUR_MAP_NAMES) {
    it(`${name}: L* rises to the centre and falls after it, mirror-symmetric`, () => {
      const lab = labOf(name);
      const L = lab.map((entry) => entry[0]);
      const half = COLOUR_MAP_SIZE / 2;
      for (let i = 1; i < half; i++) expect(L[i]!, `entry ${i}`).toBeGreaterThan(L[i - 1]!);
      for (let i = half + 1; i < COLOUR_MAP_SIZE; i++) expect(L[i]!, `entry ${i}`).toBeLessThan(L[i - 1]!);
      // Equal |values| on either side look equally strong: within 1 L* unit (8-bit rounding, gamut clipping).
      for (let i = 0; i < half; i++) {
        expect(Math.abs(L[i]! - L[COLOUR_MAP_SIZE - 1 - i]!), `entries ${i} and ${255 - i}`).toBeLessThan(1);
      }
      expect(L[0]!).toBeLessThan(45);
      expect(L[half]!).toBeGreaterThan(90);
    });

    it(`${name}: a near-neutral centre and two different hues at the ends`, () => {
      const lab = labOf(name);
      const chroma = ([, a, b]: readonly number[]) => Math.hypot(a!, b!);
      const hue = ([, a, b]: readonly number[]) => (Math.atan2(b!, a!) * 180) / Math.PI;
      expect(chroma(lab[COLOUR_MAP_SIZE / 2]!)).toBeLessThan(3);
      expect(chroma(lab[0]!)).toBeGreaterThan(20);
      expect(chroma(lab[COLOUR_MAP_SIZE - 1]!)).toBeGreaterThan(20);
      // Low end blue (b* < 0), high end red (a* > 0, b* > 0): more than 120° apart in hue.
      const low = lab[0]!;
      const high = lab[COLOUR_MAP_SIZE - 1]!;
      expect(low[2]!).toBeLessThan(0);
      expect(high[1]!).toBeGreaterThan(0);
      const apart = Math.abs(((hue(low) - hue(high) + 540) % 360) - 180);
      expect(apart).toBeGreaterThan(120);
    });
  }
});
