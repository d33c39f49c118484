/**
 * Synthetic skies with known truth, for the demo images and the engine's acceptance tests.
 *
 * image = PSF ⊛ (diffuse + point sources) + noise, with
 * - diffuse = level · exp(φ), φ a Gaussian random field with an isotropic power-law spectrum P(k) ∝ k^(−slope)
 *   (k in cycles per pixel, the k = 0 mode removed), scaled to a given standard deviation of φ: a log-normal field.
 *   It is drawn on a grid padded beyond the image (goodFftSize, at least a quarter of the size on each side) so the
 *   image does not wrap around, by filtering white noise in Fourier space (the FFT layer's real 2-D FFT).
 * - point sources at uniform random positions (sub-pixel, or at pixel centres), fluxes from Euclidean source counts
 *   dN/dS ∝ S^(−5/2) between two limits (the static Euclidean universe; from memory of the source-count
 *   literature), drawn by inverting the truncated power-law CDF.
 * - the PSF: an elliptical Gaussian, pixel-integrated (server/engine/psf). Sources are rendered with exact
 *   sub-pixel stamps; the diffuse field is convolved on its padded periodic grid.
 * - Gaussian noise of a given σ, or Poisson counts drawn from the noise-free model.
 * - optional blanked regions (NaN in the image, 0 in the mask): edge bands, rectangles, circles.
 * - a celestial TAN or SIN WCS with CDELT1 < 0, BMAJ/BMIN/BPA and BUNIT header cards.
 * All randomness comes from one SeededRandom, so the same options give the same sky, bit for bit.
 */
import { createConvolver, createRealFft2d, goodFftSize } from '../server/engine/fft';
import type { HeaderCard } from '../server/engine/io/header-card';
import {
  addStampToImage,
  FWHM_PER_SIGMA,
  psfBeamAreaPx,
  psfFromFwhm,
  psfKernelOnGrid,
  psfStamp,
  psfStampHalfSize,
  type GaussianPsf,
} from '../server/engine/psf';
import { parseWcs } from '../server/engine/wcs/wcs';
import { SeededRandom } from './random';

export interface DiffuseOptions {
  /** Median brightness of the diffuse sky (image units per pixel); 0 for none. */
  level: number;
  /** Standard deviation of φ = ln(diffuse/level). */
  logStd: number;
  /** Power-law slope of φ's spectrum, P(k) ∝ k^(−slope). */
  slope: number;
}

export interface SourceOptions {
  count: number;
  /** Flux limits in image units × pixels (the engine's flux convention: PSF of unit sum). */
  minFlux: number;
  maxFlux: number;
  /** Differential count slope: dN/dS ∝ S^(−countSlope). @default 2.5 (Euclidean) */
  countSlope?: number;
  /** Sub-pixel positions (true) or pixel centres. @default true */
  subPixel?: boolean;
  /** Keep sources at least this far apart (pixels), 0 for none. @default 0 */
  minSeparationPx?: number;
}

export interface BlankOptions {
  /** Blank bands of this width along all four edges. @default 0 */
  edgeWidthPx?: number;
  /** Blanked rectangles, 0-based inclusive–exclusive pixel ranges. */
  rectangles?: { x0: number; y0: number; x1: number; y1: number }[];
  /** Blanked circles, 0-based centre and radius in pixels. */
  circles?: { x: number; y: number; radius: number }[];
}

export interface SkySimulationOptions {
  width: number;
  height: number;
  seed: number;
  psf: { fwhmMajorPx: number; fwhmMinorPx: number; paDeg: number };
  diffuse: DiffuseOptions;
  sources: SourceOptions;
  noise: { kind: 'gaussian'; sigma: number } | { kind: 'poisson' };
  blank?: BlankOptions;
  /** Constant added to the model before noise (e.g. a flat counts background). @default 0 */
  flatBackground?: number;
  wcs: {
    projection: 'TAN' | 'SIN';
    /** Field centre (degrees). */
    raDeg: number;
    decDeg: number;
    /** Pixel size, arcsec. */
    pixelArcsec: number;
  };
  /** BUNIT. */
  unit: string;
  /** Write BMAJ/BMIN/BPA (a restoring beam, per-beam units). @default false */
  writeBeam?: boolean;
  /** Extra header cards (OBJECT, TELESCOP, …). */
  cards?: HeaderCard[];
}

export interface SimulatedSource {
  /** 0-based pixel position. */
  x: number;
  y: number;
  /** Image units × pixels. */
  flux: number;
  /** flux / beam area in pixels (e.g. Jy for a Jy/beam map); null without a beam. */
  fluxDensity: number | null;
  /**
   * The ideal SNR: flux × √(Fisher information on the flux at the truth, position known). Gaussian noise:
   * F √(Σ P²)/σ; Poisson: F √(Σ P²/λ) with λ the noise-free model, so it includes the source's own shot noise.
   */
  snrTrue: number;
  /** RA, Dec (degrees) of the position. */
  ra: number;
  dec: number;
}

export interface SimulatedSky {
  width: number;
  height: number;
  /** The observed image (NaN where blanked). */
  image: Float64Array;
  /** 1 = valid, 0 = blanked. */
  mask: Uint8Array;
  header: HeaderCard[];
  psf: GaussianPsf;
  beamAreaPx: number;
  truth: {
    /** Diffuse sky before convolution. */
    diffuseSky: Float64Array;
    /** Diffuse sky as it appears in the image (PSF-convolved, plus any flat background). */
    diffuseConvolved: Float64Array;
    /** φ = ln(diffuse/level) on the image grid (zero when level is 0). */
    logDiffuse: Float64Array;
    /** Noise-free image. */
    model: Float64Array;
    sources: SimulatedSource[];
    /** σ per pixel for Gaussian noise; null for Poisson. */
    noiseSigma: number | null;
  };
}

/**
 * A zero-mean Gaussian random field with P(k) ∝ k^(−slope) on a periodic width × height grid, scaled to unit
 * standard deviation over the grid.
 */
export function powerLawGaussianField(
  width: number,
  height: number,
  slope: number,
  random: SeededRandom,
): Float64Array {
  const fft = createRealFft2d(width, height);
  try {
    const field = new Float64Array(width * height);
    for (let i = 0; i < field.length; i++) field[i] = random.normal();
    const sw = fft.spectrumWidth;
    const re = new Float64Array(sw * height);
    const im = new Float64Array(sw * height);
    fft.forward(field, re, im);
    for (let ky = 0; ky < height; ky++) {
      const fy = (ky <= height / 2 ? ky : ky - height) / height;
      for (let kx = 0; kx < sw; kx++) {
        const fx = kx / width;
        const k = Math.hypot(fx, fy);
        const amplitude = k === 0 ? 0 : Math.pow(k, -slope / 2);
        re[ky * sw + kx] = (re[ky * sw + kx] as number) * amplitude;
        im[ky * sw + kx] = (im[ky * sw + kx] as number) * amplitude;
      }
    }
    fft.inverse(re, im, field);
    let mean = 0;
    for (const v of field) mean += v;
    mean /= field.length;
    let variance = 0;
    for (const v of field) variance += (v - mean) ** 2;
    const scale = 1 / Math.sqrt(variance / field.length);
    for (let i = 0; i < field.length; i++) field[i] = ((field[i] as number) - mean) * scale;
    return field;
  } finally {
    fft.dispose();
  }
}

/** Draws S from dN/dS ∝ S^(−a) on [min, max] by inverting the CDF (a ≠ 1). */
export function drawPowerLawFlux(random: SeededRandom, min: number, max: number, a: number): number {
  const e = 1 - a;
  const lo = Math.pow(min, e);
  const hi = Math.pow(max, e);
  return Math.pow(lo + random.uniform() * (hi - lo), 1 / e);
}

function checkOptions(o: SkySimulationOptions): void {
  if (!Number.isInteger(o.width) || !Number.isInteger(o.height) || o.width < 16 || o.height < 16) {
    throw new Error(`Simulated image must be at least 16 × 16 whole pixels (got ${o.width} × ${o.height})`);
  }
  if (o.diffuse.level < 0 || !Number.isFinite(o.diffuse.level)) throw new Error('Diffuse level must be ≥ 0');
  if (o.sources.count < 0 || !Number.isInteger(o.sources.count))
    throw new Error('Source count must be a whole number ≥ 0');
  if (o.sources.count > 0 && !(o.sources.minFlux > 0 && o.sources.maxFlux >= o.sources.minFlux)) {
    throw new Error('Source flux limits must satisfy 0 < minFlux ≤ maxFlux');
  }
  if (o.noise.kind === 'gaussian' && !(o.noise.sigma > 0)) throw new Error('Noise σ must be positive');
}

export function simulateSky(options: SkySimulationOptions): SimulatedSky {
  checkOptions(options);
  const { width, height } = options;
  const n = width * height;
  const random = new SeededRandom(options.seed);
  const psf = psfFromFwhm(options.psf.fwhmMajorPx, options.psf.fwhmMinorPx, options.psf.paDeg, true);
  const beamAreaPx = psfBeamAreaPx(psf);

  // Diffuse: log-normal field on a padded periodic grid, convolved there, then cropped.
  const pad = Math.max(psfStampHalfSize(psf), Math.ceil(Math.max(width, height) / 4));
  const pw = goodFftSize(width + 2 * pad);
  const ph = goodFftSize(height + 2 * pad);
  const diffuseSky = new Float64Array(n);
  const diffuseConvolved = new Float64Array(n);
  const logDiffuse = new Float64Array(n);
  const flat = options.flatBackground ?? 0;
  if (options.diffuse.level > 0) {
    const phi = powerLawGaussianField(pw, ph, options.diffuse.slope, random);
    const sky = new Float64Array(pw * ph);
    for (let i = 0; i < sky.length; i++)
      sky[i] = options.diffuse.level * Math.exp(options.diffuse.logStd * (phi[i] as number));
    const convolved = new Float64Array(pw * ph);
    const convolver = createConvolver(pw, ph, psfKernelOnGrid(psf, pw, ph));
    try {
      convolver.apply(sky, convolved);
    } finally {
      convolver.dispose();
    }
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const p = (y + pad) * pw + (x + pad);
        diffuseSky[y * width + x] = sky[p] as number;
        diffuseConvolved[y * width + x] = (convolved[p] as number) + flat;
        logDiffuse[y * width + x] = options.diffuse.logStd * (phi[p] as number);
      }
    }
  } else if (flat !== 0) {
    diffuseConvolved.fill(flat);
  }

  // Point sources.
  const so = options.sources;
  const countSlope = so.countSlope ?? 2.5;
  const subPixel = so.subPixel ?? true;
  const minSeparation = so.minSeparationPx ?? 0;
  const placed: { x: number; y: number; flux: number }[] = [];
  let attempts = 0;
  while (placed.length < so.count) {
    if (++attempts > 1000 * (so.count + 1)) {
      throw new Error(
        `Cannot place ${so.count} sources ${minSeparation} px apart in ${width} × ${height} pixels`,
      );
    }
    let x = random.uniform() * width - 0.5;
    let y = random.uniform() * height - 0.5;
    if (!subPixel) {
      x = Math.min(width - 1, Math.max(0, Math.round(x)));
      y = Math.min(height - 1, Math.max(0, Math.round(y)));
    }
    if (
      minSeparation > 0 &&
      placed.some((p) => (p.x - x) ** 2 + (p.y - y) ** 2 < minSeparation * minSeparation)
    )
      continue;
    placed.push({ x, y, flux: drawPowerLawFlux(random, so.minFlux, so.maxFlux, countSlope) });
  }
  const model = diffuseConvolved.slice();
  const h = psfStampHalfSize(psf);
  const stamps = placed.map((s) => {
    const cx = Math.round(s.x);
    const cy = Math.round(s.y);
    const stamp = psfStamp(psf, s.x - cx, s.y - cy, h);
    addStampToImage(model, width, height, stamp.values, h, cx, cy, s.flux);
    return { cx, cy, values: stamp.values };
  });

  // Blanking.
  const mask = new Uint8Array(n).fill(1);
  const blank = options.blank ?? {};
  const edge = blank.edgeWidthPx ?? 0;
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      let blanked = x < edge || y < edge || x >= width - edge || y >= height - edge;
      for (const r of blank.rectangles ?? [])
        if (x >= r.x0 && x < r.x1 && y >= r.y0 && y < r.y1) blanked = true;
      for (const c of blank.circles ?? [])
        if ((x - c.x) ** 2 + (y - c.y) ** 2 <= c.radius * c.radius) blanked = true;
      if (blanked) mask[y * width + x] = 0;
    }
  }

  // Noise.
  const image = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const m = model[i] as number;
    image[i] =
      options.noise.kind === 'gaussian'
        ? m + options.noise.sigma * random.normal()
        : random.poisson(Math.max(m, 0));
    if (!mask[i]) image[i] = NaN;
  }

  // Header and world positions.
  const scaleDeg = options.wcs.pixelArcsec / 3600;
  const header: HeaderCard[] = [
    { keyword: 'CTYPE1', value: `RA---${options.wcs.projection}` },
    { keyword: 'CTYPE2', value: `DEC--${options.wcs.projection}` },
    { keyword: 'CRPIX1', value: (width + 1) / 2, real: true },
    { keyword: 'CRPIX2', value: (height + 1) / 2, real: true },
    { keyword: 'CRVAL1', value: options.wcs.raDeg, real: true },
    { keyword: 'CRVAL2', value: options.wcs.decDeg, real: true },
    { keyword: 'CDELT1', value: -scaleDeg, real: true, comment: 'east to the left' },
    { keyword: 'CDELT2', value: scaleDeg, real: true },
    { keyword: 'CUNIT1', value: 'deg' },
    { keyword: 'CUNIT2', value: 'deg' },
    { keyword: 'RADESYS', value: 'ICRS' },
  ];
  if (options.writeBeam) {
    header.push(
      {
        keyword: 'BMAJ',
        value: options.psf.fwhmMajorPx * scaleDeg,
        real: true,
        comment: 'beam major axis FWHM (deg)',
      },
      {
        keyword: 'BMIN',
        value: options.psf.fwhmMinorPx * scaleDeg,
        real: true,
        comment: 'beam minor axis FWHM (deg)',
      },
      {
        keyword: 'BPA',
        value: options.psf.paDeg,
        real: true,
        comment: 'beam position angle (deg, N through E)',
      },
    );
  }
  header.push({ keyword: 'BUNIT', value: options.unit }, ...(options.cards ?? []));
  const wcs = parseWcs(header);
  if (!wcs) throw new Error('The simulated header has no usable WCS (a bug in the simulator)');

  const sigma = options.noise.kind === 'gaussian' ? options.noise.sigma : null;
  const sources: SimulatedSource[] = placed.map((s, k) => {
    const st = stamps[k] as { cx: number; cy: number; values: Float64Array };
    let information = 0;
    const size = 2 * h + 1;
    for (let j = -h; j <= h; j++) {
      const y = st.cy + j;
      if (y < 0 || y >= height) continue;
      for (let i = -h; i <= h; i++) {
        const x = st.cx + i;
        if (x < 0 || x >= width || !mask[y * width + x]) continue;
        const p = st.values[(j + h) * size + i + h] as number;
        const variance = sigma !== null ? sigma * sigma : Math.max(model[y * width + x] as number, 1e-12);
        information += (p * p) / variance;
      }
    }
    const [ra, dec] = wcs.pixelToWorld(s.x + 1, s.y + 1);
    return {
      x: s.x,
      y: s.y,
      flux: s.flux,
      fluxDensity: options.writeBeam ? s.flux / beamAreaPx : null,
      snrTrue: s.flux * Math.sqrt(information),
      ra,
      dec,
    };
  });

  return {
    width,
    height,
    image,
    mask,
    header,
    psf,
    beamAreaPx,
    truth: { diffuseSky, diffuseConvolved, logDiffuse, model, sources, noiseSigma: sigma },
  };
}

/** σ_F = σ/√(Σ P²): the flux error of an isolated source with a known position in white noise of σ per pixel. */
export function isolatedFluxError(psf: GaussianPsf, sigma: number): number {
  const stamp = psfStamp(psf, 0, 0, psfStampHalfSize(psf));
  let s = 0;
  for (const v of stamp.values) s += v * v;
  return sigma / Math.sqrt(s);
}

/** FWHM (pixels) ↔ σ, re-exported for scripts. */
export { FWHM_PER_SIGMA };
