/**
 * The whole separation: image + settings → diffuse and compact components, residuals and a source catalogue.
 *
 *   image = PSF ⊛ (diffuse + compact) + noise   (the model and its staged MAP fit: fit/model.ts, fit/staged-fit.ts)
 *
 * 1. Validate the image and resolve the settings (shared/separation-settings.ts).
 * 2. PSF: the settings' FWHMs/PA, else the header beam (BMAJ/BMIN/BPA) with the WCS pixel scale, else an image PSF
 *    given by the caller; otherwise a clear error.
 * 3. Noise: Gaussian with σ given, a σ map, or estimated robustly (noise/robust-sigma.ts); or Poisson counts
 *    (valid pixels must be whole numbers ≥ 0).
 * 4. The staged MAP fit; then the catalogue from the compact field (sources/extract-sources.ts: grouping, local
 *    PSF refinement with the diffuse model held fixed, Laplace errors).
 * Masked pixels (mask = 0, the SkyImage convention) are left out of the likelihood; the residual images hold NaN
 * there. Deterministic for the same input and settings.
 */
import { createHash } from 'node:crypto';
import type { CatalogueSource } from '../../shared/catalogue';
import {
  resolveSettings,
  stableSettingsJson,
  type ResolvedSeparationSettings,
} from '../../shared/separation-settings';
import { stagedFit, type FitProgress } from './fit/staged-fit';
import type { BinnedPower } from './fit/spectrum';
import { estimateNoiseSigma } from './noise/robust-sigma';
import { psfBeamAreaPx, psfFromBeam, psfFromFwhm, psfFwhmPx, type Beam, type Psf } from './psf';
import { extractSources } from './sources';
import type { Wcs } from './wcs/wcs';

export const MIN_IMAGE_SIDE = 16;

export interface SeparationImage {
  width: number;
  height: number;
  /** Row-major, x fastest. */
  data: Float32Array | Float64Array;
  /** 1 = valid, 0 = masked (blank). All valid when absent. */
  mask?: Uint8Array | null;
  wcs?: Wcs | null;
  beam?: Beam | null;
  /** BUNIT; a per-beam unit (e.g. "Jy/beam") adds flux densities to the catalogue. */
  unit?: string | null;
  /** A per-pixel Gaussian σ map (same size), used when the settings give no σ. */
  sigmaMap?: Float32Array | Float64Array | null;
  /** A PSF from an image (psfFromImage), used when neither the settings nor the header give one. */
  psf?: Psf | null;
}

export interface SeparationProgress extends FitProgress {
  phase: 'fit' | 'catalogue';
}

export interface SeparationOptions {
  onProgress?: (p: SeparationProgress) => void;
  signal?: AbortSignal;
}

export interface SeparationResult {
  width: number;
  height: number;
  settings: ResolvedSeparationSettings;
  settingsDigest: string;
  /**
   * s + q/α on the image grid, before convolution. The compact prior leaves every "off" pixel at u = q/α (the
   * pedestal, compactPrior.pedestal): a flat floor, not compact emission, so it is reported with the diffuse
   * component (on the faint-diffuse acceptance sky it was most of the diffuse error: a −0.16σ offset).
   */
  diffuseSky: Float32Array;
  /** PSF ⊛ s + q/α: the diffuse component as it appears in the image. */
  diffuse: Float32Array;
  /** u − q/α on the image grid (≈ 0 at "off" pixels). */
  compactSky: Float32Array;
  /** PSF ⊛ u − q/α; diffuse + compact = model. */
  compact: Float32Array;
  model: Float32Array;
  /** data − model (NaN where masked). */
  residual: Float32Array;
  /** (data − model)/σ, or (data − λ)/√λ for Poisson (NaN where masked). */
  residualNorm: Float32Array;
  /** Gaussian σ used (estimated or given; the median for a σ map); null for Poisson. */
  sigma: number | null;
  sigmaSource: 'given' | 'estimated' | 'map' | null;
  psf: Psf;
  psfFwhmPx: { major: number; minor: number };
  beamAreaPx: number;
  spectrum: {
    amplitude: number;
    slope: number;
    turnover: number;
    estimated: boolean;
    /** Binned power of the MAP field (with and without posterior variance) for the diagnostic plot. */
    binned: BinnedPower;
  };
  compactPrior: { alpha: number; q: number; pedestal: number; fluxErrorScale: number };
  paddedSize: { width: number; height: number };
  catalogue: CatalogueSource[];
  iterations: number;
  /** Objective evaluations on the padded grid. */
  evaluations: number;
  /** The diffuse-only start on the 2 × 2 binned image (staged-fit.ts), when it ran. */
  coarseStart: { evaluations: number; paddedSize: { width: number; height: number } } | null;
  objective: number;
  converged: boolean;
  trace: { stage: string; iteration: number; objective: number; gradNorm: number }[];
  seedsPerRound: number[];
  /** Wall times in milliseconds. */
  timings: { noise: number; fit: number; catalogue: number; total: number };
}

/** SHA-256 (hex) of the settings' stable JSON: equal settings give equal digests. */
export function settingsDigest(settings: ResolvedSeparationSettings): string {
  return createHash('sha256').update(stableSettingsJson(settings)).digest('hex');
}

function fail(message: string): never {
  throw new Error(message);
}

function validateImage(image: SeparationImage): Uint8Array {
  const { width, height, data } = image;
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 1 || height < 1) {
    fail(`Image size must be whole positive numbers of pixels (got ${width} × ${height})`);
  }
  if (width < MIN_IMAGE_SIDE || height < MIN_IMAGE_SIDE) {
    fail(
      `Image is ${width} × ${height} pixels; separation needs at least ${MIN_IMAGE_SIDE} × ${MIN_IMAGE_SIDE}`,
    );
  }
  const n = width * height;
  if (!data || data.length !== n) {
    fail(`Image data has ${data?.length ?? 0} values; a ${width} × ${height} image needs ${n}`);
  }
  if (image.mask && image.mask.length !== n) {
    fail(`Mask has ${image.mask.length} values; a ${width} × ${height} image needs ${n}`);
  }
  const valid = new Uint8Array(n);
  let count = 0;
  for (let i = 0; i < n; i++) {
    if ((!image.mask || image.mask[i] !== 0) && Number.isFinite(data[i]!)) {
      valid[i] = 1;
      count++;
    }
  }
  if (count === 0) fail('Every pixel of the image is blank (masked or not a number): nothing to separate');
  if (count < MIN_IMAGE_SIDE * MIN_IMAGE_SIDE) {
    fail(`Only ${count} pixels are valid; separation needs at least ${MIN_IMAGE_SIDE * MIN_IMAGE_SIDE}`);
  }
  let first = NaN;
  let constant = true;
  for (let i = 0; i < n && constant; i++) {
    if (!valid[i]) continue;
    if (Number.isNaN(first)) first = data[i]!;
    else if (data[i] !== first) constant = false;
  }
  if (constant) fail(`The image is constant (every valid pixel is ${first}): there is nothing to separate`);
  return valid;
}

/** The PSF a separation of `image` with `settings` uses (also the PSF of injected artificial sources). */
export function choosePsf(image: SeparationImage, settings: ResolvedSeparationSettings): Psf {
  const eastLeft = image.wcs ? image.wcs.cdelt1Sign() < 0 : true;
  if (settings.psf)
    return psfFromFwhm(settings.psf.fwhmMajor, settings.psf.fwhmMinor, settings.psf.pa, eastLeft);
  if (image.beam) {
    if (!image.wcs) {
      fail(
        'The image has a beam (BMAJ/BMIN) but no WCS pixel scale to convert it: give the PSF FWHM in pixels',
      );
    }
    const [sx, sy] = image.wcs.pixelScaleDeg();
    if (!(sx > 0) || Math.abs(sx - sy) > 0.01 * sx) {
      fail(
        `Pixels are not square (${sx}° × ${sy}°), so the beam cannot be converted to pixels: give the PSF FWHM in pixels`,
      );
    }
    return psfFromBeam(image.beam, sx, image.wcs.cdelt1Sign());
  }
  if (image.psf) return image.psf;
  return fail(
    'No PSF: the image header has no beam (BMAJ/BMIN/BPA) and the settings give no PSF FWHM; set psf.fwhmMajor, psf.fwhmMinor and psf.pa',
  );
}

/** a += shift in place (the fit's float32 planes become the result's, without copies). */
const shifted = (a: Float32Array, shift: number): Float32Array => {
  if (shift !== 0) for (let i = 0; i < a.length; i++) a[i] = a[i]! + shift;
  return a;
};

export async function separate(
  image: SeparationImage,
  settingsInput: unknown,
  options: SeparationOptions = {},
): Promise<SeparationResult> {
  const started = performance.now();
  const settings = resolveSettings(settingsInput);
  const valid = validateImage(image);
  const { width, height } = image;
  const n = width * height;
  const psf = choosePsf(image, settings);
  const data = new Float64Array(n);
  for (let i = 0; i < n; i++) data[i] = valid[i] ? image.data[i]! : 0;
  options.signal?.throwIfAborted();

  // Noise.
  const t0 = performance.now();
  let sigma: number | null = null;
  let sigmaSource: SeparationResult['sigmaSource'] = null;
  let noise: { kind: 'gaussian'; sigma: number | Float64Array } | { kind: 'poisson' };
  if (settings.likelihood === 'poisson') {
    for (let i = 0; i < n; i++) {
      if (!valid[i]) continue;
      const v = data[i]!;
      if (v < 0 || Math.abs(v - Math.round(v)) > 1e-6 * Math.max(1, Math.abs(v))) {
        fail(
          `Poisson likelihood needs counts (whole numbers ≥ 0), but pixel (${(i % width) + 1}, ${Math.floor(i / width) + 1}) holds ${v}; use the gaussian likelihood for this image`,
        );
      }
      data[i] = Math.round(v);
    }
    noise = { kind: 'poisson' };
  } else if (settings.noiseSigma !== null) {
    sigma = settings.noiseSigma;
    sigmaSource = 'given';
    noise = { kind: 'gaussian', sigma };
  } else if (image.sigmaMap) {
    const map = image.sigmaMap;
    if (map.length !== n) fail(`σ map has ${map.length} values; a ${width} × ${height} image needs ${n}`);
    const sigmaMap = new Float64Array(n);
    const values: number[] = [];
    for (let i = 0; i < n; i++) {
      if (!valid[i]) continue;
      const s = map[i]!;
      if (!(s > 0) || !Number.isFinite(s)) {
        fail(
          `σ map must be positive on every valid pixel; pixel (${(i % width) + 1}, ${Math.floor(i / width) + 1}) holds ${s}`,
        );
      }
      sigmaMap[i] = s;
      values.push(s);
    }
    values.sort((a, b) => a - b);
    sigma = values[values.length >> 1]!;
    sigmaSource = 'map';
    noise = { kind: 'gaussian', sigma: sigmaMap };
  } else {
    sigma = estimateNoiseSigma(data, width, height, valid).sigma;
    sigmaSource = 'estimated';
    noise = { kind: 'gaussian', sigma };
  }
  const tNoise = performance.now() - t0;

  // Fit.
  const t1 = performance.now();
  const fit = stagedFit(
    { width, height, data, valid, noise, psf },
    {
      alpha: settings.compactAlpha,
      qRelative: settings.compactScale,
      spectrum: { amplitude: settings.diffuseAmplitude, slope: settings.diffuseSlope, estimate: true },
      seedRounds: settings.seedRounds,
      seedSnr: settings.seedSnr,
      maxIterations: settings.maxIterations,
      absoluteDecrease: settings.absoluteDecrease,
      changeTolerance: settings.settleTolerance,
      signal: options.signal,
      onProgress: options.onProgress ? (p) => options.onProgress?.({ ...p, phase: 'fit' }) : undefined,
    },
  );
  const tFit = performance.now() - t1;
  options.signal?.throwIfAborted();

  // Catalogue.
  options.onProgress?.({
    phase: 'catalogue',
    stage: 'catalogue',
    iteration: fit.iterations,
    objective: fit.objective,
    gradNorm: fit.trace.at(-1)?.gradNorm ?? 0,
    evaluations: fit.evaluations,
  });
  const t2 = performance.now();
  const perBeam = image.unit ? /\/\s*beam\b|beam\s*-1|beam\^-1/i.test(image.unit) : false;
  const beamAreaPx = psfBeamAreaPx(psf);
  const catalogue = extractSources({
    width,
    height,
    data,
    mask: valid,
    noise,
    background: fit.diffuse,
    compactSky: fit.compactSky,
    psf,
    threshold: settings.threshold,
    wcs: image.wcs && image.wcs.isCelestial ? image.wcs : null,
    beamAreaPx: perBeam ? beamAreaPx : null,
    pedestal: fit.pedestal,
  });
  const tCatalogue = performance.now() - t2;

  const residual = new Float32Array(n);
  const residualNorm = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    if (!valid[i]) {
      residual[i] = NaN;
      residualNorm[i] = NaN;
      continue;
    }
    const r = data[i]! - fit.model[i]!;
    residual[i] = r;
    if (noise.kind === 'poisson') residualNorm[i] = r / Math.sqrt(Math.max(fit.model[i]!, 1e-6));
    else residualNorm[i] = r / (typeof noise.sigma === 'number' ? noise.sigma : noise.sigma[i]!);
  }

  return {
    width,
    height,
    settings,
    settingsDigest: settingsDigest(settings),
    diffuseSky: shifted(fit.diffuseSky, fit.pedestal),
    diffuse: shifted(fit.diffuse, fit.pedestal),
    compactSky: shifted(fit.compactSky, -fit.pedestal),
    compact: shifted(fit.compact, -fit.pedestal),
    model: fit.model,
    residual,
    residualNorm,
    sigma,
    sigmaSource,
    psf,
    psfFwhmPx: psfFwhmPx(psf),
    beamAreaPx,
    spectrum: {
      amplitude: fit.spectrum.amplitude,
      slope: fit.spectrum.slope,
      turnover: fit.spectrum.turnover,
      estimated: fit.spectrum.estimated,
      binned: fit.spectrum.binned,
    },
    compactPrior: { alpha: fit.alpha, q: fit.q, pedestal: fit.pedestal, fluxErrorScale: fit.fluxErrorScale },
    paddedSize: { width: fit.paddedWidth, height: fit.paddedHeight },
    catalogue,
    iterations: fit.iterations,
    evaluations: fit.evaluations,
    coarseStart: fit.coarse
      ? {
          evaluations: fit.coarse.evaluations,
          paddedSize: { width: fit.coarse.paddedWidth, height: fit.coarse.paddedHeight },
        }
      : null,
    objective: fit.objective,
    converged: fit.converged,
    trace: fit.trace,
    seedsPerRound: fit.seedsPerRound,
    timings: { noise: tNoise, fit: tFit, catalogue: tCatalogue, total: performance.now() - started },
  };
}
