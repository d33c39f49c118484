// @vitest-environment node
/**
 * A joint fit of two counts images (Poisson likelihood in both): a fine one and one with 2× larger pixels,
 * aligned, sharing the tangent point, in "counts" per pixel (so a coarse pixel collects the counts of its four
 * fine ones and the unit gain is 1), the coarse one with a 5% scale error. The sky is a flat level plus point
 * sources rendered with pixel-integrated PSF stamps (psf/psf-stamp.ts) on each grid, counts drawn by
 * samples/random.ts. Checked: the unit gains, the scale factor, the sources' counts, and normalised residuals
 * (d − λ)/√λ of unit variance in both images.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { SeededRandom } from '../../../samples/random';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import { separateJoint, type JointSeparationResult } from '../../../server/engine/joint/separate-joint';
import { addStampToImage, psfFromFwhm, psfStamp, psfStampHalfSize } from '../../../server/engine/psf';
import { parseWcs } from '../../../server/engine/wcs/wcs';

const S = 2 / 3600;
const header = (crpix: number, scale: number): HeaderCard[] => [
  { keyword: 'CTYPE1', value: 'RA---TAN' },
  { keyword: 'CTYPE2', value: 'DEC--TAN' },
  { keyword: 'CRPIX1', value: crpix },
  { keyword: 'CRPIX2', value: crpix },
  { keyword: 'CRVAL1', value: 150.1 },
  { keyword: 'CRVAL2', value: 2.2 },
  { keyword: 'CDELT1', value: -scale },
  { keyword: 'CDELT2', value: scale },
];
const FINE = 80;
const COARSE = 40;
const sources: { x: number; y: number; flux: number }[] = [];
let result: JointSeparationResult;

beforeAll(async () => {
  const random = new SeededRandom(31);
  const psfA = psfFromFwhm(3, 3, 0);
  const psfB = psfFromFwhm(4, 4, 0); // 8 fine pixels
  const level = 20; // counts per fine pixel
  const fine = new Float64Array(FINE * FINE).fill(level);
  const coarse = new Float64Array(COARSE * COARSE).fill(4 * level * 1.05);
  while (sources.length < 8) {
    const x = 8 + random.uniform() * (FINE - 16);
    const y = 8 + random.uniform() * (FINE - 16);
    if (sources.some((s) => Math.hypot(s.x - x, s.y - y) < 14)) continue;
    sources.push({ x, y, flux: 400 + 3000 * random.uniform() });
  }
  for (const s of sources) {
    const h = psfStampHalfSize(psfA);
    const cx = Math.round(s.x);
    const cy = Math.round(s.y);
    addStampToImage(fine, FINE, FINE, psfStamp(psfA, s.x - cx, s.y - cy, h).values, h, cx, cy, s.flux);
    const xb = (s.x + 0.5) / 2 - 0.5;
    const yb = (s.y + 0.5) / 2 - 0.5;
    const hb = psfStampHalfSize(psfB);
    const bx = Math.round(xb);
    const by = Math.round(yb);
    addStampToImage(
      coarse,
      COARSE,
      COARSE,
      psfStamp(psfB, xb - bx, yb - by, hb).values,
      hb,
      bx,
      by,
      s.flux * 1.05,
    );
  }
  const counts = (model: Float64Array) => Float64Array.from(model, (m) => random.poisson(m));
  const input = (name: string, data: Float64Array, side: number, crpix: number, scale: number) => ({
    name,
    width: side,
    height: side,
    data,
    wcs: parseWcs(header(crpix, scale)),
    unit: 'counts',
  });
  result = await separateJoint(
    [input('fine', counts(fine), FINE, 40.5, S), input('coarse', counts(coarse), COARSE, 20.5, 2 * S)],
    { likelihood: 'poisson' },
    {
      perImage: [
        { psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 } },
        { psf: { fwhmMajor: 4, fwhmMinor: 4, pa: 0 } },
      ],
    },
  );
}, 120_000);

describe('joint fit of two counts images', () => {
  it('takes counts per pixel with gain 1 and recovers the 5% scale error', () => {
    expect(result.images.map((i) => i.likelihood)).toEqual(['poisson', 'poisson']);
    expect(result.images[1]!.unitGain).toBe(1);
    const c = result.images[1]!.scale;
    expect(c.error).toBeGreaterThan(0);
    expect(Math.abs(c.value - 1.05)).toBeLessThan(3 * c.error);
  });

  it('finds every source with its counts', () => {
    for (const t of sources) {
      const found = result.catalogue.find((s) => Math.hypot(s.x - 1 - t.x, s.y - 1 - t.y) < 1);
      expect(found, `source at ${t.x}, ${t.y}`).toBeDefined();
      expect(Math.abs(found!.flux - t.flux)).toBeLessThan(4 * found!.fluxErr + 0.03 * t.flux);
      expect(found!.significance).toBeGreaterThan(5);
    }
  });

  it('leaves Poisson-normalised residuals of unit variance in both images', () => {
    for (const im of result.images) {
      let sum = 0;
      let count = 0;
      for (const v of im.residualNorm) {
        if (Number.isNaN(v)) continue;
        sum += v * v;
        count++;
      }
      expect(Math.sqrt(sum / count), im.name).toBeGreaterThan(0.9);
      expect(Math.sqrt(sum / count), im.name).toBeLessThan(1.1);
    }
  });
});
