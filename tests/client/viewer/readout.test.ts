import { describe, expect, it } from 'vitest';

import { formatPixelValue, formatReadout, pixelToWorldFromHeader } from '@/viewer/wcs-readout';
import { chooseScaleBar } from '@/viewer/scale-bar';
import { paintPlane, BLANK_RGBA } from '@/viewer/render-plane';
import { makeStretch } from '@/viewer/stretch';
import { colourMapTable } from '@/viewer/colour-maps';

describe('readout', () => {
  it('formats pixel, value with unit, degrees and sexagesimal', () => {
    // RA 150.11917° = 10.007944 h = 10 h 00 m 28.600 s; Dec 2.20583° = 2° 12′ 21.0″ (hand-computed).
    const readout = formatReadout({ x: 12, y: 7 }, 0.003142, 'Jy/beam', () => ({
      lon: 150.119166667,
      lat: 2.205833333,
    }));
    expect(readout).toEqual({
      pixel: 'x 12, y 7',
      value: '0.003142 Jy/beam',
      degrees: 'RA 150.11917°, Dec +2.20583°',
      sexagesimal: '10:00:28.600 +02:12:21.00',
    });
  });
  it('without a WCS or where it has no solution, shows no sky position; blank values say so', () => {
    expect(formatReadout({ x: 1, y: 1 }, NaN, null).degrees).toBeNull();
    expect(formatReadout({ x: 1, y: 1 }, 5, null, () => null).sexagesimal).toBeNull();
    expect(formatPixelValue(NaN, 'K')).toBe('blank');
    expect(formatPixelValue(12.5, null)).toBe('12.50');
    expect(formatPixelValue(-0.00031416, 'Jy/beam')).toBe('-3.142e-4 Jy/beam');
    // Negative longitudes wrap into [0°, 360°).
    expect(formatReadout({ x: 1, y: 1 }, 1, 'K', () => ({ lon: -15, lat: -30 })).degrees).toBe(
      'RA 345.00000°, Dec -30.00000°',
    );
  });
});

describe('pixelToWorld from header cards', () => {
  const header = [
    { keyword: 'CTYPE1', value: 'RA---TAN' },
    { keyword: 'CTYPE2', value: 'DEC--TAN' },
    { keyword: 'CRPIX1', value: 513 },
    { keyword: 'CRPIX2', value: 257 },
    { keyword: 'CRVAL1', value: 277.5, real: true },
    { keyword: 'CRVAL2', value: 36.2, real: true },
    { keyword: 'CDELT1', value: -0.000416666667, real: true },
    { keyword: 'CDELT2', value: 0.000416666667, real: true },
  ];
  it('maps the reference pixel to CRVAL (FITS WCS paper II: the fiducial point of a zenithal projection)', () => {
    const toWorld = pixelToWorldFromHeader(header)!;
    const world = toWorld(513, 257)!;
    expect(Math.abs(world.lon - 277.5) + Math.abs(world.lat - 36.2)).toBeLessThan(1e-10);
    // One pixel north (+y with CDELT2 > 0) raises Dec by CDELT2 (1.5″) to first order.
    const north = toWorld(513, 258)!;
    expect(Math.abs(north.lat - 36.2 - 0.000416666667)).toBeLessThan(1e-9);
    // One pixel +x moves east-to-west: RA falls by 1.5″ / cos δ.
    const west = toWorld(514, 257)!;
    expect(Math.abs(west.lon - (277.5 - 0.000416666667 / Math.cos((36.2 * Math.PI) / 180)))).toBeLessThan(
      1e-9,
    );
  });
  it('has no sky mapping for a linear or missing WCS', () => {
    expect(pixelToWorldFromHeader([{ keyword: 'NAXIS', value: 2 }])).toBeNull();
    expect(
      pixelToWorldFromHeader([
        { keyword: 'CTYPE1', value: 'FREQ' },
        { keyword: 'CTYPE2', value: 'TIME' },
        { keyword: 'CDELT1', value: 1 },
        { keyword: 'CDELT2', value: 1 },
      ]),
    ).toBeNull();
  });
});

describe('scale bar', () => {
  it('picks the longest nice angle that fits', () => {
    // 1.5″ per screen pixel, 120 px: 180″ fits → nice values ≤ 180″: 120″ = 2′ (80 px).
    expect(chooseScaleBar(1.5, 120)).toEqual({ arcsec: 120, screenPixels: 80, label: '2′' });
    // 0.1″ per pixel: ≤ 12″ → 10″ (100 px).
    expect(chooseScaleBar(0.1, 120)).toEqual({ arcsec: 10, screenPixels: 100, label: '10″' });
    // 60″ per pixel: ≤ 7200″ → 2°.
    expect(chooseScaleBar(60, 120)?.label).toBe('2°');
    expect(chooseScaleBar(0, 120)).toBeNull();
  });
});

describe('painting a plane', () => {
  it('flips rows (row 0 of the plane is the bottom), maps through the table and paints blanks neutral', () => {
    // 2 × 2 plane: bottom row [0, 1], top row [NaN, 0.5]; mask hides the bottom-right pixel.
    const data = new Float32Array([0, 1, NaN, 0.5]);
    const mask = new Uint8Array([0, 1, 0, 0]);
    const out = new Uint8ClampedArray(16);
    paintPlane({ width: 2, height: 2, data }, makeStretch({ lower: 0, upper: 1 }), 'grey', out, mask);
    const grey = colourMapTable('grey');
    // Top row in the output: NaN → blank, 0.5 → entry round(127.5) = 128.
    expect(Array.from(out.subarray(0, 4))).toEqual([...BLANK_RGBA]);
    expect(Array.from(out.subarray(4, 8))).toEqual([grey[3 * 128], grey[3 * 128], grey[3 * 128], 255]);
    // Bottom row: 0 → black, masked → blank.
    expect(Array.from(out.subarray(8, 12))).toEqual([0, 0, 0, 255]);
    expect(Array.from(out.subarray(12, 16))).toEqual([...BLANK_RGBA]);
    expect(() =>
      paintPlane(
        { width: 2, height: 2, data },
        makeStretch({ lower: 0, upper: 1 }),
        'grey',
        new Uint8ClampedArray(4),
      ),
    ).toThrow('The output has 4 bytes, expected 16.');
  });
  it('the tabulated curve gives the colour of the exact stretch within one table step', () => {
    // Steepest defaults: log (a = 1000) and asinh (β = 0.1), values spread over and beyond the limits.
    const n = 4000;
    const data = Float32Array.from({ length: n }, (_, k) => -0.2 + (1.4 * k) / (n - 1));
    const table = colourMapTable('grey');
    for (const stretchName of ['log', 'asinh', 'sqrt'] as const) {
      const stretch = makeStretch({ lower: 0, upper: 1 }, { stretch: stretchName });
      const out = paintPlane({ width: n, height: 1, data }, stretch, 'grey', new Uint8ClampedArray(4 * n));
      for (let k = 0; k < n; k++) {
        const exact = table[3 * Math.round(stretch(data[k]!) * 255)]!;
        expect(
          Math.abs(out[4 * k]! - exact),
          `${stretchName} at ${data[k]}: painted ${out[4 * k]}, exact ${exact}, tolerance 1`,
        ).toBeLessThanOrEqual(1);
      }
    }
  });
});
