// @vitest-environment node
/**
 * The general resampling path end to end: the second image is rotated by 20° against the reference, has 1.7×
 * its pixel size and another reference point, and reaches beyond the reference's footprint. The sky is simple
 * enough to render exactly on both grids without the code under test: a flat brightness plus point sources with
 * circular beams (a circular Gaussian integrated over a pixel does not depend on the grid's rotation; psfStamp
 * at each source's position on each grid, carried there by the WCS), Jy/beam in both, a 5% scale error on the
 * second. Checked: the scale factor, the sources, the normalised residuals (≈ unit variance where the model is
 * right) and the pixels left out beyond the footprint.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import { separateJoint, type JointSeparationResult } from '../../../server/engine/joint/separate-joint';
import {
  addStampToImage,
  psfBeamAreaPx,
  psfFromFwhm,
  psfStamp,
  psfStampHalfSize,
} from '../../../server/engine/psf';
import { parseWcs } from '../../../server/engine/wcs/wcs';
import { SeededRandom } from '../../../samples/random';

const S = 2 / 3600;
const ANGLE = (20 * Math.PI) / 180;
const fineHeader: HeaderCard[] = [
  { keyword: 'CTYPE1', value: 'RA---TAN' },
  { keyword: 'CTYPE2', value: 'DEC--TAN' },
  { keyword: 'CRPIX1', value: 48.5 },
  { keyword: 'CRPIX2', value: 48.5 },
  { keyword: 'CRVAL1', value: 279.2 },
  { keyword: 'CRVAL2', value: 38.8 },
  { keyword: 'CDELT1', value: -S },
  { keyword: 'CDELT2', value: S },
  { keyword: 'RADESYS', value: 'ICRS' },
  { keyword: 'BMAJ', value: 3 * S },
  { keyword: 'BMIN', value: 3 * S },
  { keyword: 'BPA', value: 0 },
];
const k = 1.7 * S;
const coarseHeader: HeaderCard[] = [
  { keyword: 'CTYPE1', value: 'RA---TAN' },
  { keyword: 'CTYPE2', value: 'DEC--TAN' },
  { keyword: 'CRPIX1', value: 31.0 },
  { keyword: 'CRPIX2', value: 29.0 },
  { keyword: 'CRVAL1', value: 279.2012 },
  { keyword: 'CRVAL2', value: 38.7995 },
  { keyword: 'CD1_1', value: -k * Math.cos(ANGLE) },
  { keyword: 'CD1_2', value: k * Math.sin(ANGLE) },
  { keyword: 'CD2_1', value: k * Math.sin(ANGLE) },
  { keyword: 'CD2_2', value: k * Math.cos(ANGLE) },
  { keyword: 'RADESYS', value: 'ICRS' },
  { keyword: 'BMAJ', value: 9 * S },
  { keyword: 'BMIN', value: 9 * S },
  { keyword: 'BPA', value: 0 },
];
const FINE = 96;
const COARSE = 60;
const truthSources: { x: number; y: number; flux: number }[] = [];
let result: JointSeparationResult;

beforeAll(async () => {
  const random = new SeededRandom(12);
  const fineWcs = parseWcs(fineHeader)!;
  const coarseWcs = parseWcs(coarseHeader)!;
  const psfA = psfFromFwhm(3, 3, 0);
  const psfB = psfFromFwhm(9 / 1.7, 9 / 1.7, 0);
  const areaA = psfBeamAreaPx(psfA);
  const areaB = psfBeamAreaPx(psfB);
  const brightness = 0.4; // Jy per fine pixel
  const sharp = new Float64Array(FINE * FINE).fill(brightness * areaA);
  const smooth = new Float64Array(COARSE * COARSE).fill(brightness * 1.7 * 1.7 * areaB * 1.05);
  while (truthSources.length < 12) {
    const x = 10 + random.uniform() * (FINE - 20);
    const y = 10 + random.uniform() * (FINE - 20);
    if (truthSources.some((s) => Math.hypot(s.x - x, s.y - y) < 14)) continue;
    truthSources.push({ x, y, flux: 4 + 30 * random.uniform() });
  }
  for (const s of truthSources) {
    const hA = psfStampHalfSize(psfA);
    const cx = Math.round(s.x);
    const cy = Math.round(s.y);
    addStampToImage(
      sharp,
      FINE,
      FINE,
      psfStamp(psfA, s.x - cx, s.y - cy, hA).values,
      hA,
      cx,
      cy,
      s.flux * areaA,
    );
    const [ra, dec] = fineWcs.pixelToWorld(s.x + 1, s.y + 1);
    const [px, py] = coarseWcs.worldToPixel(ra, dec);
    const hB = psfStampHalfSize(psfB);
    const bx = Math.round(px - 1);
    const by = Math.round(py - 1);
    addStampToImage(
      smooth,
      COARSE,
      COARSE,
      psfStamp(psfB, px - 1 - bx, py - 1 - by, hB).values,
      hB,
      bx,
      by,
      s.flux * areaB * 1.05,
    );
  }
  for (let i = 0; i < sharp.length; i++) sharp[i] = sharp[i]! + random.normal();
  for (let i = 0; i < smooth.length; i++) smooth[i] = smooth[i]! + 0.5 * random.normal();
  const input = (name: string, header: HeaderCard[], width: number, data: Float64Array) => ({
    name,
    width,
    height: width,
    data,
    wcs: parseWcs(header),
    beam: {
      majorDeg: Number(header.find((c) => c.keyword === 'BMAJ')!.value),
      minorDeg: Number(header.find((c) => c.keyword === 'BMIN')!.value),
      paDeg: 0,
    },
    unit: 'Jy/beam',
  });
  result = await separateJoint(
    [input('sharp', fineHeader, FINE, sharp), input('rotated', coarseHeader, COARSE, smooth)],
    {},
    { perImage: [{ noiseSigma: 1 }, { noiseSigma: 0.5 }] },
  );
}, 120_000);

describe('joint fit with a rotated, offset, coarser second image', () => {
  it('recovers the 5% scale error (after the catalogue re-estimate; the MAP alone is ~3σ low here)', () => {
    // seeds 12–14 of this sky: re-estimated c − 1.05 = −2.2σ, −1.0σ, +0.8σ; at the MAP −3.0σ, −2.4σ, −0.4σ
    const c = result.images[1]!.scale;
    expect(Math.abs(c.value - 1.05)).toBeLessThan(3 * c.error);
    expect(c.value).toBeGreaterThan(c.mapValue);
  });

  it('finds every source, at its position and flux', () => {
    for (const t of truthSources) {
      const found = result.catalogue.find((s) => Math.hypot(s.x - 1 - t.x, s.y - 1 - t.y) < 1);
      expect(found, `source at ${t.x}, ${t.y}`).toBeDefined();
      expect(Math.abs(found!.fluxDensity! - t.flux)).toBeLessThan(4 * found!.fluxDensityErr! + 0.03 * t.flux);
    }
    expect(result.catalogue.length).toBeLessThanOrEqual(truthSources.length + 1);
  });

  it('leaves residuals at the noise level in both images and skips the pixels beyond the footprint', () => {
    for (const im of result.images) {
      let sum = 0;
      let count = 0;
      for (const v of im.residualNorm) {
        if (Number.isNaN(v)) continue;
        sum += v * v;
        count++;
      }
      expect(Math.sqrt(sum / count), im.name).toBeLessThan(1.1);
      expect(Math.sqrt(sum / count), im.name).toBeGreaterThan(0.9);
    }
    const rotated = result.images[1]!;
    expect(rotated.pixelsOutside).toBeGreaterThan(0);
    expect(rotated.pixelsUsed + rotated.pixelsOutside).toBe(COARSE * COARSE);
    expect(result.warnings.some((w) => /lie outside the reference footprint/.test(w))).toBe(true);
  });
});
