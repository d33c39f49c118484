/**
 * The pure pieces of a completeness-and-reliability study by injection. The service queues the separation runs;
 * everything here is arithmetic over arrays:
 *
 * 1. {@link planInjections}: seeded, reproducible positions for artificial sources at each flux level, kept away
 *    from the known (detected) sources, from each other, from the image edge and from masked pixels; split into
 *    runs of at most `maxPerRun` sources so the injected sources do not crowd the image they are added to.
 * 2. {@link injectSources}: adds the PSF-shaped sources (pixel-integrated PSF stamps from the engine) to a copy of
 *    the image; masked pixels are left alone.
 * 3. {@link matchInjected}: after a run, drops recovered sources that are the known ones, pairs the rest one-to-one
 *    with the injected truth (pixel cross-match) and counts the leftovers (spurious detections).
 * 4. {@link completenessByLevel}: completeness k/n per level with a Wilson score interval, flux bias (median of
 *    measured/injected − 1, with its standard error) and scatter (1.4826·MAD of measured/injected), and the
 *    median and robust scatter of the pulls (measured − injected)/error, which should be near 0 and 1.
 * 5. {@link falseSourceRate}: detections on the image with the detected sources' model subtracted. Such an image
 *    holds diffuse emission and noise only, so anything found there at the same settings is a false source; this
 *    works for Gaussian and Poisson noise alike (unlike searching the negated image, which needs symmetric noise
 *    and no positive diffuse field). Detections within a radius of a subtracted source are left out and counted
 *    separately: they are residuals of the subtraction, which the original run had merged into that source.
 *
 * Caution that goes with every result: completeness is measured for this image and these settings only.
 */
import { psfStamp, psfStampHalfSize } from '../engine/psf';
import type { Psf } from '../engine/psf';
import { seededRandom } from '../engine/random/mulberry32';
import { crossMatchPixels, median, robustScatter } from './cross-match';
import { poissonLowerLimit, poissonUpperLimit } from './number-counts';

export const COMPLETENESS_CAUTION =
  'Completeness, flux bias and the false-source rate were measured by injecting artificial sources into this ' +
  'image and re-running the separation with these settings; they hold for this image and these settings only.';

/** A position in FITS 1-based pixel coordinates. */
export interface PixelPoint {
  x: number;
  y: number;
}

export interface InjectedSource extends PixelPoint {
  /** Index of the flux level. */
  level: number;
  /** Injected flux, image units × pixels (the PSF has unit sum). */
  flux: number;
}

export interface InjectionRun {
  level: number;
  flux: number;
  /** Seed this run's positions came from (for the record). */
  seed: number;
  truth: InjectedSource[];
}

export interface InjectionPlanOptions {
  width: number;
  height: number;
  /** Flux levels (image units × pixels), one entry per level. */
  levels: readonly number[];
  /** Artificial sources per level. */
  perLevel: number;
  /** Seed of the position generator; the same seed gives the same plan. */
  seed: number;
  /** Detected sources of the original run (FITS pixels). */
  knownSources: readonly PixelPoint[];
  /** Minimum distance to a known source and between injected sources, in pixels (e.g. 2–3 beam FWHM). */
  exclusionRadiusPixels: number;
  /** Minimum distance to the image edge in pixels. @default exclusionRadiusPixels */
  edgeMarginPixels?: number;
  /** 1 = valid pixel, 0 = masked (row-major, width × height). @default all valid */
  mask?: Uint8Array;
  /** Half-size of the box around an injected position that must be free of masked pixels. @default edgeMarginPixels */
  maskClearancePixels?: number;
  /** Most injected sources per run (image). @default perLevel */
  maxPerRun?: number;
  /** Random draws allowed per placed source before giving up. @default 2000 */
  maxAttemptsPerSource?: number;
}

/**
 * The flux of a point source with the given SNR: σ_F = σ / √(Σ psf²) is the flux error of a PSF fit to one
 * isolated source in white noise σ (the matched-filter / least-squares result), so F = SNR · σ_F.
 */
export function fluxForSnr(snr: number, noiseSigma: number, psfSumOfSquares: number): number {
  if (!(noiseSigma > 0 && psfSumOfSquares > 0)) throw new Error('Noise σ and Σpsf² must be positive.');
  return (snr * noiseSigma) / Math.sqrt(psfSumOfSquares);
}

function requirePositiveInteger(value: number, what: string): void {
  if (!Number.isInteger(value) || value < 1)
    throw new Error(`${what} must be a whole number ≥ 1 (got ${value}).`);
}

/** Chooses the injected positions for every level (see the file comment). */
export function planInjections(options: InjectionPlanOptions): InjectionRun[] {
  const { width, height, levels, perLevel, seed, knownSources, exclusionRadiusPixels } = options;
  requirePositiveInteger(width, 'Image width');
  requirePositiveInteger(height, 'Image height');
  requirePositiveInteger(perLevel, 'Sources per level');
  if (levels.length === 0) throw new Error('Give at least one flux level.');
  levels.forEach((flux) => {
    if (!(Number.isFinite(flux) && flux > 0))
      throw new Error(`Flux levels must be positive numbers (got ${flux}).`);
  });
  if (!(exclusionRadiusPixels > 0))
    throw new Error('The exclusion radius must be a positive number of pixels.');
  const edge = options.edgeMarginPixels ?? exclusionRadiusPixels;
  const clearance = Math.ceil(options.maskClearancePixels ?? edge);
  const maxPerRun = options.maxPerRun ?? perLevel;
  requirePositiveInteger(maxPerRun, 'Sources per run');
  const maxAttempts = options.maxAttemptsPerSource ?? 2000;
  const { mask } = options;
  if (mask && mask.length !== width * height) {
    throw new Error(`The mask has ${mask.length} pixels but the image has ${width}×${height}.`);
  }
  // FITS pixel centres run 1…width; the usable range keeps `edge` pixels from the outer pixel edges (0.5, w + 0.5).
  const xLow = 0.5 + edge;
  const xHigh = width + 0.5 - edge;
  const yLow = 0.5 + edge;
  const yHigh = height + 0.5 - edge;
  if (!(xHigh > xLow && yHigh > yLow)) {
    throw new Error(`The image (${width}×${height}) is too small for an edge margin of ${edge} pixels.`);
  }
  const radius2 = exclusionRadiusPixels ** 2;
  const clearOfMask = (x: number, y: number): boolean => {
    if (!mask) return true;
    const cx = Math.round(x) - 1;
    const cy = Math.round(y) - 1;
    for (let j = Math.max(0, cy - clearance); j <= Math.min(height - 1, cy + clearance); j++) {
      for (let i = Math.max(0, cx - clearance); i <= Math.min(width - 1, cx + clearance); i++) {
        if (mask[j * width + i] === 0) return false;
      }
    }
    return true;
  };
  const runs: InjectionRun[] = [];
  levels.forEach((flux, level) => {
    for (let placed = 0, runIndex = 0; placed < perLevel; runIndex++) {
      const count = Math.min(maxPerRun, perLevel - placed);
      // One seed per run, derived from the plan seed, so a run can be re-made on its own.
      const runSeed = (Math.imul(seed ^ 0x9e3779b9, 31) + level * 7919 + runIndex * 104729) >>> 0;
      const random = seededRandom(runSeed);
      const truth: InjectedSource[] = [];
      for (let n = 0; n < count; n++) {
        let done = false;
        for (let attempt = 0; attempt < maxAttempts && !done; attempt++) {
          const x = xLow + random() * (xHigh - xLow);
          const y = yLow + random() * (yHigh - yLow);
          const farFrom = (p: PixelPoint) => (p.x - x) ** 2 + (p.y - y) ** 2 >= radius2;
          if (knownSources.every(farFrom) && truth.every(farFrom) && clearOfMask(x, y)) {
            truth.push({ x, y, level, flux });
            done = true;
          }
        }
        if (!done) {
          throw new Error(
            `Could not place ${count} artificial sources ${exclusionRadiusPixels} pixels apart and away from the ` +
              `${knownSources.length} known sources, edges and masked pixels (placed ${truth.length}); ` +
              'use fewer sources per run or a smaller exclusion radius.',
          );
        }
      }
      runs.push({ level, flux, seed: runSeed, truth });
      placed += count;
    }
  });
  return runs;
}

/**
 * Adds the injected sources to a copy of the image: each source adds flux × (pixel-integrated PSF stamp centred
 * on its sub-pixel position). Light falling outside the image or on masked pixels (mask 0) is dropped.
 */
export function injectSources(
  image: Float32Array | Float64Array,
  width: number,
  height: number,
  truth: readonly InjectedSource[],
  psf: Psf,
  mask?: Uint8Array,
): Float64Array {
  if (image.length !== width * height) {
    throw new Error(`The image has ${image.length} pixels, expected ${width}×${height}.`);
  }
  const out = Float64Array.from(image);
  const halfSize = psfStampHalfSize(psf);
  const size = 2 * halfSize + 1;
  for (const source of truth) {
    const cx = Math.round(source.x - 1);
    const cy = Math.round(source.y - 1);
    const stamp = psfStamp(psf, source.x - 1 - cx, source.y - 1 - cy, halfSize);
    for (let j = -halfSize; j <= halfSize; j++) {
      const py = cy + j;
      if (py < 0 || py >= height) continue;
      for (let i = -halfSize; i <= halfSize; i++) {
        const px = cx + i;
        if (px < 0 || px >= width) continue;
        const index = py * width + px;
        if (mask && mask[index] === 0) continue;
        out[index] = out[index]! + source.flux * stamp.values[(j + halfSize) * size + (i + halfSize)]!;
      }
    }
  }
  return out;
}

/** What a run found, in FITS pixels. */
export interface RecoveredSource extends PixelPoint {
  flux: number;
  fluxErr?: number;
}

export interface InjectionOutcome {
  truth: InjectedSource;
  recovered: boolean;
  measuredFlux: number | null;
  measuredFluxErr: number | null;
  separationPixels: number | null;
}

export interface RunMatch {
  outcomes: InjectionOutcome[];
  /** Recovered sources that match neither a known nor an injected source. */
  spurious: number;
  /** Recovered sources taken to be the known ones (within knownRadiusPixels). */
  knownRecovered: number;
}

/**
 * Matches one run's recovered sources to its injected truth.
 * @param options.radiusPixels match radius for injected sources (e.g. half the beam FWHM, common practice).
 * @param options.knownRadiusPixels recovered sources this close to a known source are the known source.
 */
export function matchInjected(
  truth: readonly InjectedSource[],
  recovered: readonly RecoveredSource[],
  knownSources: readonly PixelPoint[],
  options: { radiusPixels: number; knownRadiusPixels: number },
): RunMatch {
  const known = crossMatchPixels(recovered, knownSources, { radiusPixels: options.knownRadiusPixels });
  const notKnown = known.onlyOurs.map((index) => recovered[index]!);
  const match = crossMatchPixels(truth, notKnown, { radiusPixels: options.radiusPixels });
  const outcomes: InjectionOutcome[] = truth.map((source) => ({
    truth: source,
    recovered: false,
    measuredFlux: null,
    measuredFluxErr: null,
    separationPixels: null,
  }));
  for (const pair of match.pairs) {
    const found = notKnown[pair.theirs]!;
    outcomes[pair.ours] = {
      truth: truth[pair.ours]!,
      recovered: true,
      measuredFlux: found.flux,
      measuredFluxErr: found.fluxErr ?? null,
      separationPixels: pair.separation,
    };
  }
  return { outcomes, spurious: match.onlyTheirs.length, knownRecovered: known.pairs.length };
}

/**
 * Wilson score interval for a binomial proportion (E. B. Wilson, JASA 22, 209, 1927):
 *   centre = (p̂ + z²/2n) / (1 + z²/n),  half-width = z/(1 + z²/n) · √(p̂(1 − p̂)/n + z²/4n²).
 * Unlike p̂ ± z√(p̂(1−p̂)/n) it stays inside [0, 1] and is not zero-width at k = 0 or k = n.
 * @param z normal quantile: 1 for a 68.3 % interval (default), 1.959964 for 95 %.
 */
export function wilsonInterval(k: number, n: number, z = 1): { low: number; high: number } {
  if (!Number.isInteger(n) || n < 1)
    throw new Error(`The number of trials must be a whole number ≥ 1 (got ${n}).`);
  if (!Number.isInteger(k) || k < 0 || k > n)
    throw new Error(`Successes must be a whole number from 0 to ${n} (got ${k}).`);
  if (!(z > 0)) throw new Error('z must be positive.');
  const p = k / n;
  const z2 = z * z;
  const denominator = 1 + z2 / n;
  const centre = (p + z2 / (2 * n)) / denominator;
  const half = (z / denominator) * Math.sqrt((p * (1 - p)) / n + z2 / (4 * n * n));
  return { low: Math.max(0, centre - half), high: Math.min(1, centre + half) };
}

export interface LevelResult {
  level: number;
  flux: number;
  injected: number;
  recovered: number;
  completeness: number;
  /** Wilson interval at the requested z. */
  completenessLow: number;
  completenessHigh: number;
  /** Median of measured/injected − 1 over recovered sources, and its standard error (1.2533·scatter/√k). */
  fluxBias: number | null;
  fluxBiasErr: number | null;
  /** 1.4826·MAD of measured/injected. */
  fluxScatter: number | null;
  /** Median and robust scatter of (measured − injected)/fluxErr; near 0 and 1 when the errors are honest. */
  pullMedian: number | null;
  pullScatter: number | null;
  /** Median separation of recovered sources from their injected positions, pixels. */
  medianSeparationPixels: number | null;
}

/** Per-level completeness, bias and scatter over all runs' outcomes. */
export function completenessByLevel(
  levels: readonly number[],
  outcomes: readonly InjectionOutcome[],
  options: { z?: number } = {},
): LevelResult[] {
  const z = options.z ?? 1;
  return levels.map((flux, level): LevelResult => {
    const mine = outcomes.filter((outcome) => outcome.truth.level === level);
    const found = mine.filter((outcome) => outcome.recovered && outcome.measuredFlux !== null);
    const n = mine.length;
    const k = found.length;
    const interval = n > 0 ? wilsonInterval(k, n, z) : { low: 0, high: 1 };
    const ratios = found.map((outcome) => outcome.measuredFlux! / outcome.truth.flux);
    const pulls = found
      .filter((outcome) => outcome.measuredFluxErr !== null && outcome.measuredFluxErr > 0)
      .map((outcome) => (outcome.measuredFlux! - outcome.truth.flux) / outcome.measuredFluxErr!);
    const scatter = robustScatter(ratios);
    const medianRatio = median(ratios);
    return {
      level,
      flux,
      injected: n,
      recovered: k,
      completeness: n > 0 ? k / n : 0,
      completenessLow: interval.low,
      completenessHigh: interval.high,
      fluxBias: medianRatio === null ? null : medianRatio - 1,
      fluxBiasErr: scatter === null || k < 2 ? null : (1.2533141373155 * scatter) / Math.sqrt(k),
      fluxScatter: scatter,
      pullMedian: median(pulls),
      pullScatter: robustScatter(pulls),
      medianSeparationPixels: median(found.map((outcome) => outcome.separationPixels!)),
    };
  });
}

export interface FalseSourceBin {
  snrLow: number;
  snrHigh: number;
  /** False detections in the bin, with Gehrels (1986) 1σ-equivalent limits. */
  count: number;
  countLow: number;
  countHigh: number;
  /** Per unit area (the unit of `area`). */
  rate: number;
  rateLow: number;
  rateHigh: number;
  /** Real catalogue sources in the bin, when given. */
  real: number | null;
  /** 1 − false/real, clipped to [0, 1], with limits from the count limits (real taken as exact). */
  reliability: number | null;
  reliabilityLow: number | null;
  reliabilityHigh: number | null;
}

/**
 * False-source rate per SNR bin from the detections on the source-subtracted image (see the file comment).
 * @param area survey area in any unit (deg², or pixels); rates are per that unit.
 * @param options.realSnr SNRs of the real catalogue, for the reliability per bin.
 */
export function falseSourceRate(
  detections: readonly (PixelPoint & { snr: number })[],
  options: {
    snrEdges: readonly number[];
    area: number;
    subtractedSources?: readonly PixelPoint[];
    residualRadiusPixels?: number;
    realSnr?: readonly number[];
  },
): { bins: FalseSourceBin[]; residualsExcluded: number } {
  const { snrEdges, area } = options;
  if (snrEdges.length < 2 || snrEdges.some((edge, k) => k > 0 && !(edge > snrEdges[k - 1]!))) {
    throw new Error('SNR bin edges must be at least two strictly increasing numbers.');
  }
  if (!(area > 0)) throw new Error('The area must be positive.');
  let kept = [...detections];
  let residualsExcluded = 0;
  const subtracted = options.subtractedSources ?? [];
  if (subtracted.length > 0) {
    const radius = options.residualRadiusPixels;
    if (!(radius !== undefined && radius > 0)) {
      throw new Error('Give residualRadiusPixels (> 0) to leave out residuals of the subtracted sources.');
    }
    // Every detection near any subtracted source is a residual, not only the closest one per source.
    kept = kept.filter((detection) => {
      const isResidual = subtracted.some(
        (s) => (s.x - detection.x) ** 2 + (s.y - detection.y) ** 2 <= radius * radius,
      );
      if (isResidual) residualsExcluded++;
      return !isResidual;
    });
  }
  const countIn = (values: readonly number[], low: number, high: number) =>
    values.filter((value) => value >= low && value < high).length;
  const bins = snrEdges.slice(0, -1).map((snrLow, k): FalseSourceBin => {
    const snrHigh = snrEdges[k + 1]!;
    const count = countIn(
      kept.map((detection) => detection.snr),
      snrLow,
      snrHigh,
    );
    const countLow = poissonLowerLimit(count);
    const countHigh = poissonUpperLimit(count);
    const real = options.realSnr ? countIn(options.realSnr, snrLow, snrHigh) : null;
    const clip = (value: number) => Math.min(1, Math.max(0, value));
    return {
      snrLow,
      snrHigh,
      count,
      countLow,
      countHigh,
      rate: count / area,
      rateLow: countLow / area,
      rateHigh: countHigh / area,
      real,
      reliability: real ? clip(1 - count / real) : null,
      reliabilityLow: real ? clip(1 - countHigh / real) : null,
      reliabilityHigh: real ? clip(1 - countLow / real) : null,
    };
  });
  return { bins, residualsExcluded };
}
