/**
 * Turning a study request into trials: the run's PSF (the same choice the separation made), the flux of each
 * level, how many artificial sources one trial image can hold, and the seeded positions
 * (catalogue/completeness.ts planInjections). Everything that cannot work is refused here with a 422 and a
 * message that says what to change, before anything is stored or queued.
 */
import type { CreateInjectionStudyOutput } from '../../shared/injection';
import { MAX_INJECTION_TRIALS } from '../../shared/injection';
import { resolveSettings } from '../../shared/separation-settings';
import { type InjectionRun, type PixelPoint, fluxForSnr, planInjections } from '../catalogue/completeness';
import type { HeaderCard } from '../engine/io/header-card';
import { readBeam } from '../engine/io/fits-reader';
import { type Psf, psfFwhmPx, psfStamp, psfStampHalfSize } from '../engine/psf';
import { choosePsf } from '../engine/separate';
import { parseWcs } from '../engine/wcs/wcs';
import { AppError } from '../http/app-error';

export interface StudyImage {
  width: number;
  height: number;
  header: HeaderCard[];
  /** 1 = valid, 0 = blank (row-major); may be empty when every pixel is valid. */
  mask: Uint8Array;
}

/** The PSF of the run's separation of this image (settings' FWHMs, else the header beam). */
export function runPsf(image: Pick<StudyImage, 'header'>, runSettings: unknown): Psf {
  const settings = resolveSettings(runSettings);
  const wcs = parseWcs(image.header);
  return choosePsf(
    { width: 0, height: 0, data: new Float32Array(0), wcs, beam: readBeam(image.header) },
    settings,
  );
}

/** Σ psf² of the pixel-integrated PSF centred on a pixel (for the flux error of an isolated source). */
export function psfSumOfSquares(psf: Psf): number {
  const stamp = psfStamp(psf, 0, 0, psfStampHalfSize(psf));
  let sum = 0;
  for (const value of stamp.values) sum += value * value;
  return sum;
}

/**
 * Artificial sources one trial image may hold: half the number of exclusion disks (radius r) that fit in the
 * free area (inside the edge margin, valid pixels, outside the detected sources' disks). Random placement of
 * points at least r apart jams near 0.55 of the plane covered by disks of radius r/2, i.e. about
 * 2.2 · area / (π r²) points (random sequential adsorption, from memory); half of area / (π r²) stays far below
 * that, so placement succeeds quickly and the artificial sources do not crowd the image.
 */
export function sourcesPerTrialImage(
  image: Pick<StudyImage, 'width' | 'height' | 'mask'>,
  knownSources: number,
  radiusPixels: number,
): number {
  const { width, height, mask } = image;
  let valid = width * height;
  if (mask.length === width * height) {
    valid = 0;
    for (const m of mask) if (m !== 0) valid++;
  }
  const inner = Math.max(0, width - 2 * radiusPixels) * Math.max(0, height - 2 * radiusPixels);
  const disk = Math.PI * radiusPixels * radiusPixels;
  const free = inner * (valid / (width * height)) - knownSources * disk;
  return Math.floor((0.5 * free) / disk);
}

/** Flux error of an isolated point source per unit noise σ: 1/√Σpsf² (fluxForSnr with SNR = σ = 1). */
export function fluxErrorPerSigma(psf: Psf): number {
  return fluxForSnr(1, 1, psfSumOfSquares(psf));
}

export interface StudyPlan {
  psf: Psf;
  fwhmPx: { major: number; minor: number };
  fluxes: number[];
  /** SNR of each level (null without a Gaussian σ). */
  snrs: (number | null)[];
  radiusPixels: number;
  matchRadiusPixels: number;
  /** Recovered sources this close to a detected source are that source. */
  knownRadiusPixels: number;
  perTrial: number;
  runs: InjectionRun[];
}

const unprocessable = (message: string) => new AppError('unprocessable', message);

/** Plans a study of a run; throws a 422 AppError when the image cannot hold what was asked. */
export function planStudy(
  request: CreateInjectionStudyOutput,
  image: StudyImage,
  run: { settings: unknown; noiseSigma: number | null },
  knownSources: readonly PixelPoint[],
): StudyPlan {
  let psf: Psf;
  try {
    psf = runPsf(image, run.settings);
  } catch (error) {
    throw unprocessable(`The run's PSF could not be rebuilt: ${(error as Error).message}.`);
  }
  const fwhmPx = psfFwhmPx(psf);
  const perSigma = fluxErrorPerSigma(psf);
  const sigma = run.noiseSigma;
  let fluxes: number[];
  if (request.levelKind === 'snr') {
    if (!(sigma !== null && sigma > 0)) {
      throw unprocessable(
        'SNR levels need the Gaussian noise σ of the run, and this run has none (Poisson counts): give the ' +
          'levels as fluxes (levelKind "flux").',
      );
    }
    fluxes = request.levels.map((snr) => snr * sigma * perSigma);
  } else {
    fluxes = [...request.levels];
  }
  const snrs = fluxes.map((flux) => (sigma !== null && sigma > 0 ? flux / (sigma * perSigma) : null));
  const radiusPixels = request.radiusFwhm * fwhmPx.major;
  // Half a FWHM: the usual pixel match radius for point sources (common practice); at least one pixel.
  const matchRadiusPixels = Math.max(1, 0.5 * fwhmPx.major);
  const knownRadiusPixels = Math.max(1.5, fwhmPx.major);
  const capacity = sourcesPerTrialImage(image, knownSources.length, radiusPixels);
  if (capacity < 1) {
    throw unprocessable(
      `This ${image.width}×${image.height} image cannot hold an artificial source ${radiusPixels.toFixed(1)} ` +
        `pixels (${request.radiusFwhm} FWHM) from the edge and from each of its ${knownSources.length} ` +
        'detected sources; use a larger image or a smaller distance.',
    );
  }
  const perTrial = Math.min(capacity, request.sourcesPerLevel);
  const trials = request.levels.length * Math.ceil(request.sourcesPerLevel / perTrial) + 1;
  if (trials > MAX_INJECTION_TRIALS) {
    const most = Math.floor((MAX_INJECTION_TRIALS - 1) / request.levels.length) * perTrial;
    throw unprocessable(
      `This image holds at most ${perTrial} artificial sources per trial image ${request.radiusFwhm} FWHM apart, ` +
        `so ${request.sourcesPerLevel} sources at ${request.levels.length} levels would need ${trials} ` +
        `separations (the most is ${MAX_INJECTION_TRIALS}); use at most ${most} sources per level or fewer levels.`,
    );
  }
  let runs: InjectionRun[];
  try {
    runs = planInjections({
      width: image.width,
      height: image.height,
      levels: fluxes,
      perLevel: request.sourcesPerLevel,
      seed: request.seed,
      knownSources,
      exclusionRadiusPixels: radiusPixels,
      mask: image.mask.length === image.width * image.height ? image.mask : undefined,
      maxPerRun: perTrial,
    });
  } catch (error) {
    throw unprocessable((error as Error).message);
  }
  return { psf, fwhmPx, fluxes, snrs, radiusPixels, matchRadiusPixels, knownRadiusPixels, perTrial, runs };
}
