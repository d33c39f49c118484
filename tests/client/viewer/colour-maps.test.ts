import { describe, expect, it } from 'vitest';

import { COLOUR_MAP_NAMES, COLOUR_MAP_SIZE, colourMapTable } from '@/viewer/colour-maps';
import { srgb8ToLab } from '@/viewer/colour-science';

describe('sRGB → CIELAB (IEC 61966-2-1 sRGB, CIE 15:2004 CIELAB, D65)', () => {
  it('reproduces known colours', () => {
    // White is L* = 100, a* = b* = 0 by construction of the D65 white point (within the 4-digit matrix).
    const white = srgb8ToLab(255, 255, 255);
    expect(Math.abs(white[0] - 100)).toBeLessThan(0.01);
    expect(Math.abs(white[1]) + Math.abs(white[2])).toBeLessThan(0.1);
    expect(srgb8ToLab(0, 0, 0)[0]).toBe(0);
    // Mid grey 119/255: L* = 50.0 (a widely quoted value, from memory: sRGB 119 ≈ L* 50).
    expect(Math.abs(srgb8ToLab(119, 119, 119)[0] - 50)).toBeLessThan(0.3);
    // Pure sRGB red: L* 53.24, a* 80.09, b* 67.20 (commonly tabulated values, from memory).
    const red = srgb8ToLab(255, 0, 0);
    expect(Math.abs(red[0] - 53.24)).toBeLessThan(0.05);
    expect(Math.abs(red[1] - 80.09)).toBeLessThan(0.1);
    expect(Math.abs(red[2] - 67.2)).toBeLessThan(0.1);
  });
});

describe('colour maps', () => {
  it('has a grey map and at least three others', () => {
    expect(COLOUR_MAP_NAMES).toContain('grey');
    expect(COLOUR_MAP_NAMES.length).toBeGreaterThanOrEqual(4);
  });
  for (const name of COLOUR_MAP_NAMES) {
    it(`${name}: L* strictly rises along the table and spans most of the range`, () => {
      const table = colourMapTable(name);
      expect(table.length).toBe(COLOUR_MAP_SIZE * 3);
      const lightness = Array.from(
        { length: COLOUR_MAP_SIZE },
        (_, i) => srgb8ToLab(table[3 * i]!, table[3 * i + 1]!, table[3 * i + 2]!)[0],
      );
      for (let i = 1; i < COLOUR_MAP_SIZE; i++) {
        expect(
          lightness[i]!,
          `${name} entry ${i}: L* ${lightness[i]} after ${lightness[i - 1]} (rgb ${table.subarray(3 * i, 3 * i + 3)})`,
        ).toBeGreaterThan(lightness[i - 1]!);
      }
      expect(lightness[0]!).toBeLessThan(10);
      expect(lightness[COLOUR_MAP_SIZE - 1]!).toBeGreaterThan(90);
    });
  }
  for (const name of COLOUR_MAP_NAMES.filter((n) => n !== 'grey')) {
    it(`${name}: lightness steps are even (perceptually uniform in L*)`, () => {
      const table = colourMapTable(name);
      const L = (i: number) => srgb8ToLab(table[3 * i]!, table[3 * i + 1]!, table[3 * i + 2]!)[0];
      const steps: number[] = [];
      for (let i = 16; i < COLOUR_MAP_SIZE; i += 16) steps.push(L(i) - L(i - 16));
      const mean = steps.reduce((a, b) => a + b, 0) / steps.length;
      for (const [k, step] of steps.entries()) {
        expect(
          Math.abs(step - mean),
          `${name} block ${k}: ΔL* ${step} vs mean ${mean} (tolerance 5 %)`,
        ).toBeLessThan(0.05 * mean);
      }
    });
  }
  it('refuses an unknown map by name', () => {
    expect(() => colourMapTable('rainbow' as never)).toThrow('Unknown colour map "rainbow".');
  });
});
