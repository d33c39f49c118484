// @vitest-environment node
import { describe, expect, it } from 'vitest';
import {
  activeCompactPixels,
  binnedInput,
  freeModes,
  type FitInput,
} from '../../../server/engine/fit/staged-fit';

describe('activeCompactPixels', () => {
  it('frees the square of the given radius around every pixel above twice the off level, clipped at the edges', () => {
    const width = 9;
    const height = 7;
    const pedestal = 0.1;
    const tau = new Float64Array(width * height).fill(Math.log(pedestal));
    tau[3 * width + 4] = Math.log(5); // on, in the middle
    tau[0] = Math.log(2.5 * pedestal); // on, in a corner (above twice the off level)
    tau[6 * width + 8] = Math.log(1.9 * pedestal); // below twice the off level: not on
    const active = Array.from(activeCompactPixels(tau, pedestal, 1, width, height));
    const expected: number[] = [];
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const nearMiddle = Math.abs(x - 4) <= 1 && Math.abs(y - 3) <= 1;
        const nearCorner = x <= 1 && y <= 1;
        if (nearMiddle || nearCorner) expected.push(y * width + x);
      }
    }
    expect(active).toEqual(expected);
    expect(
      activeCompactPixels(new Float64Array(12).fill(Math.log(pedestal)), pedestal, 3, 4, 3),
    ).toHaveLength(0);
  });
});

describe('freeModes', () => {
  it('lists the modes whose data curvature P|K|²κ reaches the floor', () => {
    const power = Float64Array.from([0, 1, 0.01, 1e-4, 2]);
    const transfer = Float64Array.from([1, 1, 1, 1, 1e-6]);
    // κ = 10: P|K|²κ = 0, 10, 0.1, 1e-3, 2e-5
    expect(Array.from(freeModes(power, transfer, 10, 1e-3))).toEqual([1, 2, 3]);
    expect(Array.from(freeModes(power, transfer, 10, 0.5))).toEqual([1]);
  });
});

describe('binnedInput', () => {
  const width = 66;
  const height = 64;
  const data = Float64Array.from({ length: width * height }, (_, i) => i % 7);
  const valid = new Uint8Array(width * height).fill(1);
  valid[2 * width + 5] = 0;
  const base: FitInput = {
    width,
    height,
    data,
    valid,
    noise: { kind: 'gaussian', sigma: 0.5 },
    psf: { kind: 'gaussian', fwhmMajorPx: 4, fwhmMinorPx: 3, paDeg: 30, eastLeft: true },
  };

  it('sums 2 × 2 blocks, drops blocks with a masked pixel, adds the noise variances and halves the PSF', () => {
    const b = binnedInput(base)!;
    expect([b.width, b.height]).toEqual([33, 32]);
    const block = (xc: number, yc: number) =>
      data[2 * yc * width + 2 * xc]! +
      data[2 * yc * width + 2 * xc + 1]! +
      data[(2 * yc + 1) * width + 2 * xc]! +
      data[(2 * yc + 1) * width + 2 * xc + 1]!;
    expect(b.data[5 * 33 + 7]).toBe(block(7, 5));
    expect(b.valid[1 * 33 + 2]).toBe(0); // holds the masked fine pixel (5, 2)
    expect(b.valid[1 * 33 + 3]).toBe(1);
    // σ of a sum of four independent pixels: √(4 σ²) = 2σ
    expect(b.noise).toEqual({ kind: 'gaussian', sigma: 1 });
    expect(b.psf).toEqual({ kind: 'gaussian', fwhmMajorPx: 2, fwhmMinorPx: 1.5, paDeg: 30, eastLeft: true });
  });

  it('keeps a per-pixel σ map as √Σσ² and Poisson as Poisson', () => {
    const sigma = new Float64Array(width * height).fill(0.3);
    sigma[0] = 0.4;
    const b = binnedInput({ ...base, noise: { kind: 'gaussian', sigma } })!;
    const map = (b.noise as { sigma: Float64Array }).sigma;
    expect(map[0]).toBeCloseTo(Math.sqrt(0.16 + 3 * 0.09), 12);
    expect(map[1]).toBeCloseTo(0.6, 12);
    expect(binnedInput({ ...base, noise: { kind: 'poisson' } })!.noise).toEqual({ kind: 'poisson' });
  });

  it('declines when binning would not be sound: a sampled PSF, a PSF under 2.4 pixels, an image under 64 pixels', () => {
    expect(binnedInput({ ...base, psf: { ...base.psf, fwhmMinorPx: 2.3 } as FitInput['psf'] })).toBeNull();
    expect(
      binnedInput({ ...base, width: 62, data: data.subarray(0, 62 * 64), valid: valid.subarray(0, 62 * 64) }),
    ).toBeNull();
    const sampled: FitInput['psf'] = {
      kind: 'image',
      width: 3,
      height: 3,
      data: new Float64Array(9).fill(1 / 9),
      centreX: 1,
      centreY: 1,
    };
    expect(binnedInput({ ...base, psf: sampled })).toBeNull();
  });
});

describe('the coarse start', () => {
  it('runs the diffuse stage on the binned image and ends near the fit without it', async () => {
    const { simulateSky } = await import('../../../samples/sky-simulator');
    const { stagedFit } = await import('../../../server/engine/fit/staged-fit');
    const sky = simulateSky({
      width: 96,
      height: 80,
      seed: 77,
      psf: { fwhmMajorPx: 3.5, fwhmMinorPx: 3, paDeg: 20 },
      diffuse: { level: 4, logStd: 0.6, slope: 3.5 },
      sources: { count: 6, minFlux: 40, maxFlux: 400 },
      noise: { kind: 'gaussian', sigma: 1 },
      wcs: { projection: 'TAN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
      unit: 'Jy/beam',
    });
    const input: FitInput = {
      width: 96,
      height: 80,
      data: sky.image,
      valid: sky.mask,
      noise: { kind: 'gaussian', sigma: 1 },
      psf: { kind: 'gaussian', fwhmMajorPx: 3.5, fwhmMinorPx: 3, paDeg: 20, eastLeft: true },
    };
    const withCoarse = stagedFit(input);
    const without = stagedFit(input, { coarseStart: false });
    expect(withCoarse.coarse).not.toBeNull();
    expect(withCoarse.coarse!.evaluations).toBeGreaterThan(0);
    expect(withCoarse.coarse!.paddedWidth).toBeLessThan(withCoarse.paddedWidth);
    expect(without.coarse).toBeNull();
    // both diffuse components near the truth, and near each other (measured 0.19 and 0.18 σ RMS from the
    // truth, 0.05 σ apart)
    const rms = (a: Float64Array, b: ArrayLike<number>) => {
      let s = 0;
      for (let i = 0; i < a.length; i++) s += (a[i]! - b[i]!) ** 2;
      return Math.sqrt(s / a.length);
    };
    const truth = sky.truth.diffuseConvolved;
    const coarseDiffuse = Float64Array.from(withCoarse.diffuse, (v) => v + withCoarse.pedestal);
    const fineDiffuse = Float64Array.from(without.diffuse, (v) => v + without.pedestal);
    expect(rms(coarseDiffuse, truth)).toBeLessThan(0.25);
    expect(rms(fineDiffuse, truth)).toBeLessThan(0.25);
    expect(rms(coarseDiffuse, fineDiffuse)).toBeLessThan(0.1);
  });
});
