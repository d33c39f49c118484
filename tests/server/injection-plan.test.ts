// @vitest-environment node
/**
 * The planning pieces of an injection study (server/injection/injection-plan.ts, survey-area.ts), without a
 * database: the PSF the run used, Σpsf² against the Gaussian integral, the flux of an SNR level, how many
 * sources a trial image holds, the 422 refusals, and the survey area in deg² or pixel².
 * Outside reference: for a unit-sum Gaussian of standard deviation s pixels, Σ psf² → ∫ g² = 1/(4π s²) when the
 * PSF is well sampled (the Gaussian integral; any statistics handbook).
 */
import { describe, expect, it } from 'vitest';

import { FWHM_PER_SIGMA } from '../../server/engine/psf';
import {
  planStudy,
  psfSumOfSquares,
  runPsf,
  sourcesPerTrialImage,
} from '../../server/injection/injection-plan';
import { surveyArea } from '../../server/injection/survey-area';
import { AppError } from '../../server/http/app-error';
import { fastSettings, smallSky } from './runs/run-support';

const sky = smallSky(5, 96);
const image = { width: 96, height: 96, header: sky.header, mask: new Uint8Array(0) };
const request = { levelKind: 'snr' as const, levels: [5, 40], sourcesPerLevel: 10, seed: 1, radiusFwhm: 3 };

describe('injection plan', () => {
  it('uses the PSF of the run and its Σpsf² matches the Gaussian integral', () => {
    const psf = runPsf(image, fastSettings);
    expect(psf).toMatchObject({ kind: 'gaussian', fwhmMajorPx: 3, fwhmMinorPx: 3 });
    const wide = runPsf(image, { psf: { fwhmMajor: 8, fwhmMinor: 8, pa: 0 } });
    const s = 8 / FWHM_PER_SIGMA;
    // Pixel integration changes Σpsf² by under 1 % at this sampling (8 px FWHM).
    expect(Math.abs(psfSumOfSquares(wide) * 4 * Math.PI * s * s - 1)).toBeLessThan(0.01);
    // From the header beam (BMAJ 4.5″ at 1.5″ pixels in the simulated header) when the settings give none.
    expect(runPsf(image, {}).kind).toBe('gaussian');
  });

  it('turns SNR levels into fluxes with σ / √Σpsf² and keeps the sources apart', () => {
    const plan = planStudy(request, image, { settings: fastSettings, noiseSigma: 1e-4 }, [{ x: 48, y: 48 }]);
    const psf = runPsf(image, fastSettings);
    expect(plan.fluxes[0]).toBeCloseTo((5 * 1e-4) / Math.sqrt(psfSumOfSquares(psf)), 15);
    expect(plan.snrs[1]).toBeCloseTo(40, 12);
    expect(plan.radiusPixels).toBeCloseTo(9, 12);
    const placed = plan.runs.flatMap((run) => run.truth);
    expect(placed).toHaveLength(20);
    expect(plan.runs.every((run) => run.truth.length <= plan.perTrial)).toBe(true);
    for (const p of placed) expect(Math.hypot(p.x - 48, p.y - 48)).toBeGreaterThanOrEqual(9);
    // Same seed, same plan; another seed, another.
    const again = planStudy(request, image, { settings: fastSettings, noiseSigma: 1e-4 }, [{ x: 48, y: 48 }]);
    expect(again.runs).toEqual(plan.runs);
    const other = planStudy({ ...request, seed: 2 }, image, { settings: fastSettings, noiseSigma: 1e-4 }, [
      { x: 48, y: 48 },
    ]);
    expect(other.runs).not.toEqual(plan.runs);
  });

  it('holds half as many sources per trial image as exclusion disks fit in the free area', () => {
    // 96 − 2·9 = 78 px inside the margin: 78² = 6084 px², one disk π·81 = 254.5 px² → ⌊0.5 · 6084 / 254.5⌋ = 11.
    expect(sourcesPerTrialImage({ width: 96, height: 96, mask: new Uint8Array(0) }, 0, 9)).toBe(11);
    // Each detected source takes a disk: ⌊0.5 · (6084 − 10 · 254.5) / 254.5⌋ = 6.
    expect(sourcesPerTrialImage({ width: 96, height: 96, mask: new Uint8Array(0) }, 10, 9)).toBe(6);
    // Half the pixels masked halves the room.
    const mask = new Uint8Array(96 * 96).fill(1).fill(0, 0, 48 * 96);
    expect(sourcesPerTrialImage({ width: 96, height: 96, mask }, 0, 9)).toBe(5);
  });

  it('refuses with 422 what cannot work, saying what to change', () => {
    const refuse = (fn: () => unknown) => {
      try {
        fn();
      } catch (error) {
        expect(error).toBeInstanceOf(AppError);
        expect((error as AppError).code).toBe('unprocessable');
        return (error as AppError).message;
      }
      throw new Error('not refused');
    };
    expect(refuse(() => planStudy(request, image, { settings: fastSettings, noiseSigma: null }, []))).toMatch(
      /SNR levels need the Gaussian noise σ of the run.*give the levels as fluxes/,
    );
    expect(
      refuse(() =>
        planStudy({ ...request, radiusFwhm: 10 }, image, { settings: fastSettings, noiseSigma: 1e-4 }, []),
      ),
    ).toMatch(/cannot hold an artificial source 30\.0 pixels/);
    // 12 levels × ⌈100 / 11⌉ = 120 injection trials + 1; at most ⌊59 / 12⌋ · 11 = 44 sources per level.
    const twelve = Array.from({ length: 12 }, (_, k) => k + 3);
    expect(
      refuse(() =>
        planStudy(
          { ...request, levels: twelve, sourcesPerLevel: 100 },
          image,
          { settings: fastSettings, noiseSigma: 1e-4 },
          [],
        ),
      ),
    ).toBe(
      'This image holds at most 11 artificial sources per trial image 3 FWHM apart, so 100 sources at 12 levels ' +
        'would need 121 separations (the most is 60); use at most 44 sources per level or fewer levels.',
    );
  });
});

describe('survey area', () => {
  it('is valid pixels × the pixel solid angle in deg² with a celestial WCS, else pixel²', () => {
    const celestial = surveyArea(96, 96, new Uint8Array(0), sky.header);
    expect(celestial.unit).toBe('deg2');
    expect(celestial.area).toBeCloseTo(9216 * (1.5 / 3600) ** 2, 15);
    const mask = new Uint8Array(96 * 96).fill(1);
    mask[0] = 0;
    expect(surveyArea(96, 96, mask, sky.header).validPixels).toBe(9215);
    // A header with pixel axes only (no CTYPE/CDELT): no celestial WCS.
    const plain = [
      { keyword: 'SIMPLE', value: true },
      { keyword: 'NAXIS', value: 2 },
      { keyword: 'NAXIS1', value: 32 },
      { keyword: 'NAXIS2', value: 32 },
    ];
    const pixels = surveyArea(32, 32, new Uint8Array(0), plain);
    expect(pixels).toEqual({ area: 1024, unit: 'pixel2', validPixels: 1024, pixelArea: 1 });
  });
});
