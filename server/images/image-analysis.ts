/**
 * What the service stores about an image beside its pixels: statistics of the valid pixels, a robust noise σ,
 * and people-readable summaries of its WCS and beam. Pure functions of a SkyImage.
 */
import type {
  BeamSummary,
  ImageFormatName,
  NoiseEstimate,
  PixelStatistics,
  WcsSummary,
} from '../../shared/images';
import type { HeaderCard } from '../engine/io/header-card';
import type { SkyImage } from '../engine/io/sky-image';
import { medianInPlace } from '../engine/noise/median';
import { estimateNoiseSigma } from '../engine/noise/robust-sigma';
import { psfBeamAreaPx, psfFromBeam } from '../engine/psf';
import type { Wcs } from '../engine/wcs/wcs';
import { thumbnailPng } from './thumbnail';

/**
 * Min, max, mean, median and standard deviation of the valid pixels (mask = 1), and the valid / blank counts.
 * Mean and variance by Welford's one-pass update (B. P. Welford, Technometrics 4, 1962), in float64.
 * The image has at least one valid pixel (the reader refuses all-blank images).
 */
export function pixelStatistics(data: Float32Array, mask: Uint8Array): PixelStatistics {
  const scratch = new Float64Array(data.length);
  let n = 0;
  let min = Infinity;
  let max = -Infinity;
  let mean = 0;
  let m2 = 0;
  for (let i = 0; i < data.length; i++) {
    if (mask[i] !== 1) continue;
    const v = data[i]!;
    scratch[n++] = v;
    if (v < min) min = v;
    if (v > max) max = v;
    const delta = v - mean;
    mean += delta / n;
    m2 += delta * (v - mean);
  }
  if (n === 0) throw new Error('pixel statistics need at least one valid pixel');
  return {
    min,
    max,
    mean,
    median: medianInPlace(scratch, n),
    standardDeviation: n > 1 ? Math.sqrt(m2 / (n - 1)) : 0,
    validPixels: n,
    blankPixels: data.length - n,
  };
}

/**
 * Robust white-noise σ (engine/noise/robust-sigma.ts) with an approximate uncertainty, or null when the image
 * gives no estimate (e.g. an 8-bit picture whose neighbouring pixels are mostly equal).
 * Uncertainty: the MAD has 36.75 % asymptotic efficiency at the normal (Rousseeuw & Croux 1993, JASA 88, from
 * memory), so SE(σ) ≈ σ / √(2 n · 0.3675) ≈ 1.65 σ / √(2n). Neighbouring Laplacian values share pixels, so the
 * effective n is smaller: read it as a lower bound.
 */
export function noiseEstimate(image: SkyImage): NoiseEstimate | null {
  try {
    const { sigma, samples } = estimateNoiseSigma(image.data, image.width, image.height, image.mask);
    return { sigma, samples, sigmaUncertainty: sigma / Math.sqrt(2 * samples * 0.3675) };
  } catch {
    return null;
  }
}

export function wcsSummary(wcs: Wcs | null, width: number, height: number): WcsSummary | null {
  if (!wcs) return null;
  const [scale1, scale2] = wcs.pixelScaleDeg();
  const toArcsec = wcs.isCelestial ? 3600 : 1;
  // FITS 1-based: the centre of a width × height image is at ((width + 1) / 2, (height + 1) / 2).
  const [lon, lat] = wcs.pixelToWorld((width + 1) / 2, (height + 1) / 2);
  return {
    celestial: wcs.isCelestial,
    projection: wcs.projection,
    frame: wcs.frame,
    equinox: wcs.equinox,
    ctype: [wcs.ctype[0], wcs.ctype[1]],
    referencePixel: [wcs.referencePixel[0], wcs.referencePixel[1]],
    referenceValue: [wcs.referenceValue[0], wcs.referenceValue[1]],
    pixelScaleArcsec: [scale1 * toArcsec, scale2 * toArcsec],
    cdelt1Sign: wcs.cdelt1Sign(),
    centre: Number.isFinite(lon) && Number.isFinite(lat) ? { lon, lat } : null,
  };
}

/**
 * The beam in arcseconds and its Gaussian solid angle in pixels, π θmaj θmin / (4 ln 2) (engine/psf/psf.ts),
 * when the WCS is celestial with (near) square pixels; the area is null otherwise.
 */
export function beamSummary(image: SkyImage): BeamSummary | null {
  const beam = image.beam;
  if (!beam) return null;
  let areaPixels: number | null = null;
  const wcs = image.wcs;
  if (wcs?.isCelestial) {
    const [s1, s2] = wcs.pixelScaleDeg();
    if (s1 > 0 && s2 > 0 && Math.abs(s1 - s2) <= 1e-3 * Math.max(s1, s2)) {
      try {
        areaPixels = psfBeamAreaPx(psfFromBeam(beam, Math.sqrt(s1 * s2), wcs.cdelt1Sign()));
      } catch {
        areaPixels = null;
      }
    }
  }
  return {
    majorArcsec: beam.majorDeg * 3600,
    minorArcsec: beam.minorDeg * 3600,
    paDeg: beam.paDeg,
    areaPixels,
  };
}

/** Everything stored about a read image; plain data (no functions), so it can cross a thread boundary. */
export interface AnalysedImage {
  format: ImageFormatName;
  width: number;
  height: number;
  plane: number | null;
  originalAxes: number[];
  unit: string | null;
  header: HeaderCard[];
  warnings: string[];
  wcs: WcsSummary | null;
  beam: BeamSummary | null;
  statistics: PixelStatistics;
  noise: NoiseEstimate | null;
  /** The float32 plane, row 0 = FITS y = 1, blank pixels 0. */
  pixels: Float32Array;
  /** 1 = valid, 0 = blank. */
  mask: Uint8Array;
  /** PNG bytes. */
  thumbnail: Uint8Array;
}

export function analyseImage(image: SkyImage): AnalysedImage {
  return {
    format: image.format,
    width: image.width,
    height: image.height,
    plane: image.plane,
    originalAxes: image.originalAxes,
    unit: image.unit,
    header: image.header,
    warnings: image.warnings,
    wcs: wcsSummary(image.wcs, image.width, image.height),
    beam: beamSummary(image),
    statistics: pixelStatistics(image.data, image.mask),
    noise: noiseEstimate(image),
    pixels: image.data,
    mask: image.mask,
    thumbnail: new Uint8Array(thumbnailPng(image.data, image.mask, image.width, image.height)),
  };
}
