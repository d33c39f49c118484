// @vitest-environment node
/**
 * WCS against astropy.wcs (wcslib): the values in tests/fixtures/astropy/wcs/cases.json were computed by
 * tests/fixtures/astropy/wcs/make.py with Debian's python3-astropy (versions recorded in the JSON).
 * Tolerances: world positions within 1e-9° of great-circle separation (~4 µas), pixels within 1e-7 px.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import { parseWcs } from '../../../server/engine/wcs/wcs';

interface Case {
  name: string;
  header: Record<string, string | number>;
  pixelToWorld: { pixel: [number, number]; world: [number | null, number | null] }[];
  worldToPixel: { world: [number, number]; pixel: [number | null, number | null] }[];
  radesys: string;
  equinox: number | null;
  longitudeAxis: number;
  pixelScalesDeg: [number, number];
}
const fixture = JSON.parse(
  readFileSync(new URL('../../fixtures/astropy/wcs/cases.json', import.meta.url), 'utf8'),
) as { astropy: string; cases: Case[] };

const WORLD_TOLERANCE_DEG = 1e-9;
const PIXEL_TOLERANCE = 1e-7;

function cardsFrom(header: Record<string, string | number>): HeaderCard[] {
  return Object.entries(header).map(([keyword, value]) => ({ keyword, value }));
}

/** Great-circle separation in degrees (haversine, stable for tiny angles). */
function separationDeg(a: [number, number], b: [number, number]): number {
  const r = Math.PI / 180;
  const dLat = (b[1] - a[1]) * r;
  const dLon = (b[0] - a[0]) * r;
  const h = Math.sin(dLat / 2) ** 2 + Math.cos(a[1] * r) * Math.cos(b[1] * r) * Math.sin(dLon / 2) ** 2;
  return (2 * Math.asin(Math.min(1, Math.sqrt(h)))) / r;
}

describe(`WCS against astropy ${fixture.astropy}`, () => {
  it('finds the fixture cases', () => {
    expect(fixture.cases.length).toBe(24);
  });

  for (const c of fixture.cases) {
    describe(c.name, () => {
      const wcs = parseWcs(cardsFrom(c.header));

      it('parses as a celestial WCS with the same axes, frame and pixel scales', () => {
        expect(wcs, `${c.name}: parseWcs returned null`).not.toBeNull();
        expect(wcs!.isCelestial).toBe(true);
        expect(wcs!.longitudeAxis).toBe(c.longitudeAxis);
        const frame = c.radesys.trim();
        if (String(c.header.CTYPE1).startsWith('GLON')) expect(wcs!.frame).toBe('galactic');
        else expect(wcs!.frame).toBe(frame);
        expect(wcs!.equinox).toBe(c.equinox);
        const scales = wcs!.pixelScaleDeg();
        for (let i = 0; i < 2; i++) {
          expect(
            Math.abs(scales[i]! - c.pixelScalesDeg[i]!),
            `scale ${i}: ${scales[i]} vs ${c.pixelScalesDeg[i]}`,
          ).toBeLessThan(1e-15);
        }
      });

      it(`pixel → world within ${WORLD_TOLERANCE_DEG}°`, () => {
        for (const { pixel, world } of c.pixelToWorld) {
          const got = wcs!.pixelToWorld(pixel[0], pixel[1]);
          if (world[0] === null || world[1] === null) {
            expect(got.map(Number.isNaN), `${c.name} pixel ${pixel}: astropy gives NaN, got ${got}`).toEqual([
              true,
              true,
            ]);
            continue;
          }
          const error = separationDeg(got, [world[0], world[1]]);
          expect(
            error,
            `${c.name} pixel ${pixel}: expected ${world}, got ${got}, difference ${error}°, tolerance ${WORLD_TOLERANCE_DEG}°`,
          ).toBeLessThan(WORLD_TOLERANCE_DEG);
        }
      });

      it(`world → pixel within ${PIXEL_TOLERANCE} px`, () => {
        for (const { world, pixel } of c.worldToPixel) {
          const got = wcs!.worldToPixel(world[0], world[1]);
          if (pixel[0] === null || pixel[1] === null) {
            expect(got.map(Number.isNaN), `${c.name} world ${world}: astropy gives NaN, got ${got}`).toEqual([
              true,
              true,
            ]);
            continue;
          }
          const error = Math.hypot(got[0] - pixel[0], got[1] - pixel[1]);
          expect(
            error,
            `${c.name} world ${world}: expected ${pixel}, got ${got}, difference ${error} px, tolerance ${PIXEL_TOLERANCE}`,
          ).toBeLessThan(PIXEL_TOLERANCE);
        }
      });
    });
  }
});
