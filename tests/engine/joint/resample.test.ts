// @vitest-environment node
/**
 * Resampling between image grids for the joint fit.
 * Positions against astropy: tests/fixtures/astropy/joint/cases.json was computed by
 * tests/fixtures/astropy/joint/make.py with Debian's python3-astropy (wcs_pix2world / wcs_world2pix, and
 * SkyCoord(...).transform_to('galactic') for the galactic case; versions in the JSON).
 * Tolerances: 1e−6 px within one frame; 0.01 px (20 mas at 2″ pixels) for galactic, where astropy goes through
 * FK5 with the ICRS frame bias (≈ 20 mas) that the Hipparcos matrix used here leaves out.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import {
  commonGrid,
  commonGridHeader,
  commonToImageMap,
  frameConversion,
  imageToCommonMap,
  meanPixelScaleDeg,
} from '../../../server/engine/joint/common-grid';
import { buildResampler } from '../../../server/engine/joint/resample';
import { parseWcs, type Wcs } from '../../../server/engine/wcs/wcs';

interface Case {
  name: string;
  reference: Record<string, string | number>;
  other: Record<string, string | number>;
  points: { pixel: [number, number]; world: [number, number]; otherPixel: [number, number] }[];
}
const fixture = JSON.parse(
  readFileSync(new URL('../../fixtures/astropy/joint/cases.json', import.meta.url), 'utf8'),
) as { astropy: string; cases: Case[] };

const cards = (h: Record<string, string | number>): HeaderCard[] =>
  Object.entries(h).map(([keyword, value]) => ({ keyword, value }));
const wcsOf = (h: Record<string, string | number>): Wcs => parseWcs(cards(h))!;

describe(`common grid → image pixel maps against astropy ${fixture.astropy}`, () => {
  it('has the four fixture cases', () => expect(fixture.cases.length).toBe(4));
  for (const c of fixture.cases) {
    it(`${c.name}: reference pixels land where astropy puts them, and back`, () => {
      const ref = wcsOf(c.reference);
      const other = wcsOf(c.other);
      const grid = commonGrid(
        ref,
        Number(c.reference.NAXIS1),
        Number(c.reference.NAXIS2),
        meanPixelScaleDeg(ref),
      );
      expect(grid.factor).toBe(1);
      const forward = commonToImageMap(grid, other, ['reference', c.name]);
      const backward = imageToCommonMap(grid, other, ['reference', c.name]);
      const tolerance = c.name === 'galactic' ? 0.01 : 1e-6;
      for (const p of c.points) {
        const [x, y] = forward(p.pixel[0] - 1, p.pixel[1] - 1);
        expect(Math.abs(x + 1 - p.otherPixel[0]), `${c.name} x at ${p.pixel}`).toBeLessThan(tolerance);
        expect(Math.abs(y + 1 - p.otherPixel[1]), `${c.name} y at ${p.pixel}`).toBeLessThan(tolerance);
        const [bx, by] = backward(p.otherPixel[0] - 1, p.otherPixel[1] - 1);
        expect(Math.abs(bx + 1 - p.pixel[0])).toBeLessThan(tolerance);
        expect(Math.abs(by + 1 - p.pixel[1])).toBeLessThan(tolerance);
      }
    });
  }
});

describe('resampling operator', () => {
  const aligned = fixture.cases.find((c) => c.name === 'coarse-aligned')!;
  const rotated = fixture.cases.find((c) => c.name === 'rotated-offset')!;

  it('is the exact 2 × 2 block sum for the aligned pair, covering every coarse pixel', () => {
    const ref = wcsOf(aligned.reference);
    const grid = commonGrid(ref, 128, 128, meanPixelScaleDeg(ref));
    const r = buildResampler(128, 128, 64, 64, commonToImageMap(grid, wcsOf(aligned.other), ['a', 'b']));
    for (let y = 0; y < 128; y += 7) {
      for (let x = 0; x < 128; x += 5) {
        const { index, weight } = r.weightsOf(y * 128 + x);
        expect(index).toEqual([Math.floor(y / 2) * 64 + Math.floor(x / 2)]);
        expect(weight[0]).toBeCloseTo(1, 9);
      }
    }
    for (const c of r.coverage) expect(c).toBeCloseTo(1, 9);
  });

  it('conserves flux and has an exact adjoint in the rotated, offset case', () => {
    const ref = wcsOf(rotated.reference);
    const grid = commonGrid(ref, 128, 128, meanPixelScaleDeg(ref));
    const r = buildResampler(128, 128, 80, 80, commonToImageMap(grid, wcsOf(rotated.other), ['a', 'b']));
    // a point source well inside both images keeps its flux exactly
    for (const [x, y] of [
      [64, 64],
      [40, 90],
      [100, 30],
    ] as const) {
      const field = new Float64Array(128 * 128);
      field[y * 128 + x] = 3.7;
      const out = new Float64Array(80 * 80);
      r.apply(field, out);
      expect(out.reduce((s, v) => s + v, 0)).toBeCloseTo(3.7, 12);
    }
    // ⟨R a, b⟩ = ⟨a, Rᵀ b⟩
    const a = Float64Array.from({ length: 128 * 128 }, (_, i) => Math.sin(i * 0.37) + 1.5);
    const b = Float64Array.from({ length: 80 * 80 }, (_, i) => Math.cos(i * 0.11));
    const ra = new Float64Array(80 * 80);
    r.apply(a, ra);
    const rtb = new Float64Array(128 * 128);
    r.adjoint(b, rtb);
    const left = ra.reduce((s, v, i) => s + v * b[i]!, 0);
    const right = a.reduce((s, v, i) => s + v * rtb[i]!, 0);
    expect(Math.abs(left - right)).toBeLessThan(1e-9 * Math.abs(left));
    // the 1.7× pixels are fully covered inside the reference footprint, not outside it
    const [cx, cy] = commonToImageMap(grid, wcsOf(rotated.other), ['a', 'b'])(64, 64);
    expect(r.coverage[Math.round(cy) * 80 + Math.round(cx)]).toBeCloseTo(1, 6);
    expect(r.coverage[0]).toBeLessThan(0.5);
  });

  it('makes the common grid of a coarse reference match the fine image pixel for pixel, and writes its header', () => {
    const coarse = wcsOf(aligned.other);
    const fine = wcsOf(aligned.reference);
    const grid = commonGrid(coarse, 64, 64, meanPixelScaleDeg(fine));
    expect(grid.factor).toBe(2);
    expect([grid.width, grid.height]).toEqual([128, 128]);
    const map = commonToImageMap(grid, fine, ['coarse', 'fine']);
    for (const [x, y] of [
      [0, 0],
      [127, 0],
      [64, 77],
      [127, 127],
    ] as const) {
      const [fx, fy] = map(x, y);
      expect(Math.abs(fx - x)).toBeLessThan(1e-6);
      expect(Math.abs(fy - y)).toBeLessThan(1e-6);
    }
    const header = commonGridHeader(grid, coarse, cards(aligned.other));
    const written = parseWcs(header)!;
    for (const [x, y] of [
      [1, 1],
      [50.5, 99],
      [128, 128],
    ] as const) {
      const [a1, b1] = written.pixelToWorld(x, y);
      const [a2, b2] = grid.pixelToWorld(x, y);
      expect(Math.abs(a1 - a2) * 3600).toBeLessThan(1e-6);
      expect(Math.abs(b1 - b2) * 3600).toBeLessThan(1e-6);
    }
  });

  it('refuses celestial frames it cannot convert between, naming both images', () => {
    expect(() =>
      frameConversion({ frame: 'ICRS', equinox: null }, { frame: 'ecliptic', equinox: null }, [
        'image 1',
        'image 2',
      ]),
    ).toThrow(/image 2 is in the ecliptic frame and image 1 in equatorial-j2000: no conversion/);
    expect(() =>
      frameConversion({ frame: 'FK4', equinox: 1950 }, { frame: 'ICRS', equinox: null }, [
        'image 1',
        'image 2',
      ]),
    ).toThrow(/FK4 \(equinox 1950\)/);
    const same = frameConversion({ frame: 'FK5', equinox: 2000 }, { frame: 'ICRS', equinox: null }, [
      'a',
      'b',
    ]);
    expect(same(10, 20)).toEqual([10, 20]);
  });
});
