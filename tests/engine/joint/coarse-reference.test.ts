// @vitest-environment node
/**
 * A joint fit whose reference (image 1) is the smooth, coarse image: the common grid is then 2× finer than the
 * reference (the sharp image's pixels), sources are refined on the sharp image and reported in the reference's
 * pixels (FITS 1-based: fine 0-based x ↦ (x + ½)/2 + ½) and its flux scale (Jy for Jy/beam, on the reference's
 * calibration, here 7% high), and the scale factor of the sharp image is 1/1.07 relative to the reference.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { simulateJointPair, type JointPair } from '../../../samples/joint-pair';
import { readBeam } from '../../../server/engine/io/fits-reader';
import { separateJoint, type JointSeparationResult } from '../../../server/engine/joint/separate-joint';
import { parseWcs } from '../../../server/engine/wcs/wcs';

let pair: JointPair;
let joint: JointSeparationResult;

beforeAll(async () => {
  pair = simulateJointPair({
    size: 96,
    seed: 8,
    sharp: { fwhmPx: 3, sigma: 1 },
    smooth: { fwhmFinePx: 9, sigma: 0.5, scaleError: 1.07 },
    diffuse: { level: 4, logStd: 0.5, slope: 4 },
    sources: { count: 10, minFlux: 4, maxFlux: 40, minSeparationPx: 10, marginPx: 8 },
  });
  const input = (im: JointPair['sharp'], name: string) => ({
    name,
    width: im.width,
    height: im.height,
    data: im.image,
    wcs: parseWcs(im.header),
    beam: readBeam(im.header),
    unit: 'Jy/beam',
  });
  joint = await separateJoint([input(pair.smooth, 'smooth'), input(pair.sharp, 'sharp')], {});
}, 120_000);

describe('joint fit with the coarse image as the reference', () => {
  it('uses a common grid at the sharp image’s scale and refines sources on the sharp image', () => {
    expect(joint.grid).toMatchObject({ width: 96, height: 96, factor: 2 });
    expect(joint.sharpestImage).toBe(1);
    expect(joint.refinement).toBe('sharpest-image');
    const c = joint.images[1]!.scale;
    expect(Math.abs(c.value - 1 / 1.07)).toBeLessThan(3 * c.error + 0.002);
  });

  it('reports bright sources at their true positions in the reference’s pixels, with their true flux densities', () => {
    const bright = pair.truth.sources.filter((t) => t.flux >= 5); // SNR ≳ 11 in the sharp image
    expect(bright.length).toBeGreaterThanOrEqual(3);
    for (const t of bright) {
      const x = (t.x + 0.5) / 2 + 0.5;
      const y = (t.y + 0.5) / 2 + 0.5;
      const found = joint.catalogue.find((s) => Math.hypot(s.x - x, s.y - y) < 0.5);
      expect(found, `source at ${x}, ${y}`).toBeDefined();
      // positions within 4σ; fluxes on the reference's scale, which carries the 7% (1.07 × truth), within 4σ
      // plus 5% (a bright source in structured diffuse emission)
      expect(Math.abs(found!.x - x)).toBeLessThan(4 * found!.xErr + 0.05);
      expect(Math.abs(found!.y - y)).toBeLessThan(4 * found!.yErr + 0.05);
      expect(Math.abs(found!.fluxDensity! - 1.07 * t.flux)).toBeLessThan(
        4 * found!.fluxDensityErr! + 0.05 * t.flux,
      );
      expect(Math.abs(found!.ra! - t.ra) * Math.cos((t.dec * Math.PI) / 180) * 3600).toBeLessThan(1);
      expect(Math.abs(found!.dec! - t.dec) * 3600).toBeLessThan(1);
    }
  });
});
