// @vitest-environment node
/**
 * The joint fit's checks before fitting, each refused with a message that names the image; and the unit gains
 * (beam areas, pixel areas, prefixes) against hand computation from the FITS unit conventions.
 */
import { describe, expect, it } from 'vitest';
import { simulateJointPair } from '../../../samples/joint-pair';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import { readBeam } from '../../../server/engine/io/fits-reader';
import { separateJoint, type JointInputImage } from '../../../server/engine/joint/separate-joint';
import { parseBrightnessUnit, unitGains } from '../../../server/engine/joint/units';
import { parseWcs } from '../../../server/engine/wcs/wcs';

const pair = simulateJointPair({
  size: 64,
  seed: 3,
  sharp: { fwhmPx: 3, sigma: 1 },
  smooth: { fwhmFinePx: 9, sigma: 0.5, scaleError: 1 },
  diffuse: { level: 5, logStd: 0.5, slope: 4 },
  sources: { count: 4, minFlux: 5, maxFlux: 20, minSeparationPx: 6 },
});

function input(
  which: 'sharp' | 'smooth',
  change: (cards: HeaderCard[]) => HeaderCard[] = (c) => c,
  unit = 'Jy/beam',
): JointInputImage {
  const im = pair[which];
  const header = change(im.header.map((c) => ({ ...c })));
  return {
    name: `${which}.fits`,
    width: im.width,
    height: im.height,
    data: im.image,
    wcs: parseWcs(header),
    beam: readBeam(header),
    unit,
  };
}

const setCard = (keyword: string, value: number | string) => (cards: HeaderCard[]) =>
  cards.map((c) => (c.keyword === keyword ? { ...c, value } : c));

describe('joint fit checks', () => {
  it('refuses an image without a celestial WCS', async () => {
    const noWcs = { ...input('smooth'), wcs: null };
    await expect(separateJoint([input('sharp'), noWcs], {})).rejects.toThrow(
      /^image 2 \(smooth\.fits\) has no celestial WCS/,
    );
  });

  it('refuses footprints that do not overlap', async () => {
    const away = input('smooth', setCard('CRVAL2', 40.8));
    await expect(separateJoint([input('sharp'), away], {})).rejects.toThrow(
      /^image 2 \(smooth\.fits\) does not overlap the footprint of the reference image \(image 1 \(sharp\.fits\)\)/,
    );
  });

  it('refuses celestial frames without a supported conversion', async () => {
    const fk4 = input('smooth', (c) => [
      ...setCard('RADESYS', 'FK4')(c),
      { keyword: 'EQUINOX', value: 1950, real: true },
    ]);
    await expect(separateJoint([input('sharp'), fk4], {})).rejects.toThrow(
      /image 2 \(smooth\.fits\) is in the FK4 \(equinox 1950\) frame and image 1 \(sharp\.fits\) in equatorial-j2000: no conversion/,
    );
  });

  it('refuses units that cannot be reconciled, and a missing unit beside a known one', async () => {
    await expect(separateJoint([input('sharp'), input('smooth', undefined, 'K')], {})).rejects.toThrow(
      /^Cannot reconcile the units "Jy\/beam" \(image 1 \(sharp\.fits\)\) and "K" \(image 2 \(smooth\.fits\)\)/,
    );
    await expect(separateJoint([input('sharp'), input('smooth', undefined, '')], {})).rejects.toThrow(
      /^Cannot reconcile the units: image 2 \(smooth\.fits\) has no BUNIT while image 1 \(sharp\.fits\) is in "Jy\/beam"/,
    );
  });

  it('refuses a single image and an image without a PSF', async () => {
    await expect(separateJoint([input('sharp')], {})).rejects.toThrow(/at least two images/);
    const noBeam = { ...input('smooth'), beam: null };
    await expect(separateJoint([input('sharp'), noBeam], {})).rejects.toThrow(
      /^image 2 \(smooth\.fits\): no PSF/,
    );
  });
});

describe('unit gains', () => {
  it('reads per-beam, per-pixel, per-steradian and prefixed units', () => {
    expect(parseBrightnessUnit('Jy/beam')).toMatchObject({ base: 'Jy', scale: 1, per: 'beam' });
    expect(parseBrightnessUnit('mJy beam-1')).toMatchObject({ base: 'Jy', scale: 1e-3, per: 'beam' });
    expect(parseBrightnessUnit('JY/BEAM')).toMatchObject({ base: 'Jy', per: 'beam' });
    expect(parseBrightnessUnit('MJy/sr')).toMatchObject({ base: 'Jy', scale: 1e6, per: 'steradian' });
    expect(parseBrightnessUnit('Jy/pixel')).toMatchObject({ base: 'Jy', per: 'pixel' });
    expect(parseBrightnessUnit('counts')).toMatchObject({ base: 'counts', per: 'pixel' });
  });

  it('converts by beam areas, pixel solid angles and prefixes', () => {
    // a point of S Jy sums to S·A (A = beam area in pixels) in a Jy/beam map, to S in a Jy/pixel map,
    // to 1000·S·A in a mJy/beam map, and to S/(Ω_pix·10⁶) in MJy/sr
    const omega = (2 / 3600 / (180 / Math.PI)) ** 2;
    const { gains } = unitGains(
      [
        { unit: parseBrightnessUnit('Jy/beam'), beamAreaPx: 10, pixelSteradian: omega },
        { unit: parseBrightnessUnit('mJy/beam'), beamAreaPx: 25, pixelSteradian: 4 * omega },
        { unit: parseBrightnessUnit('Jy/pixel'), beamAreaPx: 25, pixelSteradian: omega },
        { unit: parseBrightnessUnit('MJy/sr'), beamAreaPx: 25, pixelSteradian: omega },
      ],
      ['a', 'b', 'c', 'd'],
    );
    expect(gains[0]).toBe(1);
    expect(gains[1]).toBeCloseTo((1000 * 25) / 10, 10);
    expect(gains[2]).toBeCloseTo(1 / 10, 12);
    expect(gains[3]!).toBeCloseTo(1 / (omega * 1e6) / 10, 3);
  });
});
