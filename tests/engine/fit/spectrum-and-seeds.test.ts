// @vitest-environment node
import { describe, expect, it } from 'vitest';
import { createConvolver } from '../../../server/engine/fft';
import { matchedFilterSeeds } from '../../../server/engine/fit/seed-points';
import {
  binnedPower,
  fitPowerLaw,
  modeWavenumbers,
  powerLawSpectrum,
} from '../../../server/engine/fit/spectrum';
import { paddedSize } from '../../../server/engine/fit/staged-fit';
import { goodFftSize } from '../../../server/engine/fft';
import { psfFromFwhm, psfKernelOnGrid } from '../../../server/engine/psf';

describe('power-law spectrum', () => {
  it('recovers amplitude and slope from binned power that follows the law exactly', () => {
    // At the truth the expected MAP power of a mode is φ̂_k² = P_k − D_k (total variance minus the posterior
    // variance), so φ̂² + D = P exactly and the fit must return the law it was made from.
    const w = 64;
    const h = 48;
    const k = modeWavenumbers(w, h);
    const truth = { amplitude: 2e-4, slope: 3.7, turnover: 1 / 64 };
    const prior = powerLawSpectrum(k, truth, null, new Float64Array(w * h));
    const transfer = new Float64Array(w * h).fill(1);
    const kappa = 50;
    const phiHat = prior.map((p) => Math.sqrt(Math.max(p - 1 / (1 / p + kappa), 0)));
    phiHat[0] = 0;
    const binned = binnedPower(k, phiHat, prior, transfer, kappa, 0.5);
    expect(binned.k.length).toBeGreaterThan(5);
    const fitted = fitPowerLaw(binned, truth.turnover, 1, 8);
    // The bin means are means of P over a bin, not P at the bin's mean k: a few per cent of slope at most.
    expect(Math.abs(fitted.slope - truth.slope), `slope ${fitted.slope} vs ${truth.slope}`).toBeLessThan(0.1);
    expect(Math.abs(Math.log(fitted.amplitude / truth.amplitude))).toBeLessThan(0.3);
  });

  it('clamps the slope into the allowed range', () => {
    const k = modeWavenumbers(32, 32);
    const prior = powerLawSpectrum(
      k,
      { amplitude: 1e-3, slope: 7.5, turnover: 1 / 32 },
      null,
      new Float64Array(1024),
    );
    const phiHat = prior.map((p) => Math.sqrt(Math.max(p - 1 / (1 / p + 10), 0)));
    const binned = binnedPower(k, phiHat, prior, new Float64Array(1024).fill(1), 10, 0.5);
    expect(fitPowerLaw(binned, 1 / 32, 2, 6).slope).toBe(6);
  });

  it('pads the grid by at least 20% and 4 FWHM + 8 pixels, to a fast FFT size', () => {
    expect(paddedSize(256, 3)).toBe(goodFftSize(256 + 52));
    expect(paddedSize(50, 10)).toBe(goodFftSize(50 + 48));
  });
});

describe('matched-filter seeding', () => {
  it('puts a seed on a point source with its flux', () => {
    const width = 40;
    const height = 36;
    const pw = 64;
    const ph = 48;
    const kernel = psfKernelOnGrid(psfFromFwhm(3, 3, 0), pw, ph);
    const psf = createConvolver(pw, ph, kernel);
    const psfSquared = createConvolver(
      pw,
      ph,
      kernel.map((v) => v * v),
    );
    // a noiseless point of flux 50 at pixel (17, 20)
    const sky = new Float64Array(pw * ph);
    sky[20 * pw + 17] = 50;
    psf.apply(sky, sky);
    const residual = new Float64Array(width * height);
    for (let y = 0; y < height; y++)
      for (let x = 0; x < width; x++) residual[y * width + x] = sky[y * pw + x]!;
    const weight = new Float64Array(width * height).fill(1);
    const seeds = matchedFilterSeeds({
      width,
      height,
      pw,
      ph,
      residual,
      weight,
      psf,
      psfSquared,
      precision: 'float64',
      snr: 3,
    });
    expect(seeds.length).toBe(1);
    expect(seeds[0]!.index).toBe(20 * width + 17);
    // generalised least squares for one amplitude recovers the flux exactly without noise
    expect(Math.abs(seeds[0]!.flux - 50)).toBeLessThan(1e-9);
    // SNR = F √ΣK² / σ
    let s2 = 0;
    for (const v of kernel) s2 += v * v;
    expect(Math.abs(seeds[0]!.snr - 50 * Math.sqrt(s2))).toBeLessThan(1e-8);
    psf.dispose();
    psfSquared.dispose();
  });
});
