// @vitest-environment node
/**
 * Three images of one sky: the sharp one, a smooth one with 2× pixels (+7% scale error) and another with 4×
 * pixels (−5%). samples/joint-pair.ts draws the same sky and the same sharp image for the same seed whatever the
 * coarse factor (its random stream does not depend on it up to the smooth image's noise), so two pairs give the
 * three images. Checked: both scale factors with their own errors and the joint covariance path (the Schur
 * complement is 2 × 2 here), and the outputs per image.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { simulateJointPair, type JointPair } from '../../../samples/joint-pair';
import { readBeam } from '../../../server/engine/io/fits-reader';
import { separateJoint, type JointSeparationResult } from '../../../server/engine/joint/separate-joint';
import { parseWcs } from '../../../server/engine/wcs/wcs';

let result: JointSeparationResult;
let pairs: JointPair[];

beforeAll(async () => {
  const options = (factor: number, scaleError: number) => ({
    size: 96,
    seed: 17,
    factor,
    sharp: { fwhmPx: 3, sigma: 1 },
    smooth: { fwhmFinePx: 9, sigma: 0.5, scaleError },
    diffuse: { level: 5, logStd: 0.6, slope: 4 },
    sources: { count: 10, minFlux: 3, maxFlux: 40, minSeparationPx: 6 },
  });
  pairs = [simulateJointPair(options(2, 1.07)), simulateJointPair(options(4, 0.95))];
  const input = (im: JointPair['sharp'], name: string) => ({
    name,
    width: im.width,
    height: im.height,
    data: im.image,
    wcs: parseWcs(im.header),
    beam: readBeam(im.header),
    unit: 'Jy/beam',
  });
  result = await separateJoint(
    [
      input(pairs[0]!.sharp, 'sharp'),
      input(pairs[0]!.smooth, 'smooth-2x'),
      input(pairs[1]!.smooth, 'smooth-4x'),
    ],
    {},
  );
}, 120_000);

describe('joint fit of three images', () => {
  it('draws the same sharp image for both coarse factors (so the three images share one sky)', () => {
    expect(pairs[1]!.sharp.image).toEqual(pairs[0]!.sharp.image);
    expect(pairs[1]!.smooth.width).toBe(24);
  });

  it('recovers both flux-scale factors within 3σ', () => {
    const [, c2, c3] = result.images.map((i) => i.scale);
    expect(c2!.error).toBeGreaterThan(0);
    expect(c3!.error).toBeGreaterThan(0);
    expect(Math.abs(c2!.value - 1.07)).toBeLessThan(3 * c2!.error);
    expect(Math.abs(c3!.value - 0.95)).toBeLessThan(3 * c3!.error);
  });

  it('gives components and residuals for every image on its own grid', () => {
    expect(result.images.map((i) => [i.width, i.height])).toEqual([
      [96, 96],
      [48, 48],
      [24, 24],
    ]);
    for (const im of result.images) {
      expect(im.model.length).toBe(im.width * im.height);
      let sum = 0;
      let count = 0;
      for (const v of im.residualNorm) {
        if (Number.isNaN(v)) continue;
        sum += v * v;
        count++;
      }
      expect(Math.sqrt(sum / count), im.name).toBeLessThan(1.15);
    }
    expect(result.catalogue.length).toBeGreaterThan(3);
  });
});
