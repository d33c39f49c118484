/**
 * Joint separation of several images of the same field: one diffuse and one compact field on a common sky
 * grid (common-grid.ts), every image predicted through its own resampling, PSF, unit and flux-scale factor
 * (joint-model.ts), one staged MAP fit (joint-fit.ts), a catalogue on the reference image.
 *
 * Checks before fitting, each refused with a message: an image without a celestial WCS, a footprint that does
 * not overlap the reference's, celestial frames without a supported conversion, units that cannot be reconciled
 * (units.ts), an image PSF at a pixel scale other than the common grid's.
 * Settings: the separation settings (shared/separation-settings.ts) hold for the whole fit; their likelihood
 * for every image, their PSF and noise σ for the reference (image 1) only; `perImage[i]` overrides the
 * likelihood, noise σ (in that image's unit), PSF (FWHMs in that image's pixels) and unit of image i + 1.
 * Catalogue: sources are refined on the reference image (sources/extract-sources.ts) with the joint fit's
 * diffuse model of that image held fixed, so positions are in the reference's pixels and fluxes in its
 * convention (image units × pixels; flux density for per-beam units).
 */
import type { CatalogueSource } from '../../../shared/catalogue';
import { resolveSettings, type ResolvedSeparationSettings } from '../../../shared/separation-settings';
import { estimateNoiseSigma } from '../noise/robust-sigma';
import { psfBeamAreaPx, psfFromBeam, psfFromFwhm, psfFwhmPx, type Beam, type Psf } from '../psf';
import { MIN_IMAGE_SIDE, settingsDigest } from '../separate';
import { extractSources } from '../sources';
import type { Wcs } from '../wcs/wcs';
import {
  commonGrid,
  commonToImageMap,
  frameConversion,
  imageToCommonMap,
  meanPixelScaleDeg,
  type CommonGrid,
} from './common-grid';
import { jointFit, type JointFitResult } from './joint-fit';
import { buildResampler } from './resample';
import { polishScales } from './scale-polish';
import { parseBrightnessUnit, unitGains } from './units';

export interface JointInputImage {
  /** Shown in messages and the provenance (e.g. the file name). */
  name: string;
  width: number;
  height: number;
  data: Float32Array | Float64Array;
  mask?: Uint8Array | null;
  wcs?: Wcs | null;
  beam?: Beam | null;
  unit?: string | null;
  sigmaMap?: Float32Array | Float64Array | null;
  psf?: Psf | null;
}

export interface PerImageSettings {
  likelihood?: 'gaussian' | 'poisson';
  noiseSigma?: number;
  /** FWHMs in this image's pixels, PA in degrees. */
  psf?: { fwhmMajor: number; fwhmMinor: number; pa: number };
  /** Overrides BUNIT. */
  unit?: string;
}

export interface JointOptions {
  /** Per image, by position (index 0 = the reference). */
  perImage?: (PerImageSettings | undefined)[];
  /** Width of the log-normal prior on the flux-scale factors. @default 0.05 */
  scalePriorWidth?: number;
  /** Common pixels per reference pixel; default from the finest pixel scale. */
  gridFactor?: number;
  /** @default true */
  fitScales?: boolean;
  /**
   * Re-estimate the scale factors with the catalogue's refined fluxes in place of the pixel-grid compact field
   * (scale-polish.ts). @default true
   */
  polishScales?: boolean;
  /** Stage change test in σ (joint-fit.ts). @default 0.02 */
  changeTolerance?: number;
  onProgress?: (p: {
    stage: string;
    iteration: number;
    objective: number;
    gradNorm: number;
    evaluations: number;
  }) => void;
  signal?: AbortSignal;
}

export interface JointImageResult {
  name: string;
  width: number;
  height: number;
  psf: Psf;
  psfFwhmPx: { major: number; minor: number };
  beamAreaPx: number;
  unit: string;
  /** Values of this image per unit of the reference's (beam areas, pixel areas, prefixes). */
  unitGain: number;
  likelihood: 'gaussian' | 'poisson';
  sigma: number | null;
  sigmaSource: 'given' | 'estimated' | 'map' | null;
  /** Valid pixels that entered the fit (mask ∧ covered by the common grid). */
  pixelsUsed: number;
  /** Valid pixels left out because the common grid does not cover them. */
  pixelsOutside: number;
  /** c_i with its error; mapValue is the joint MAP's value before the re-estimate of scale-polish.ts. */
  scale: { value: number; error: number; fixed: boolean; mapValue: number };
  diffuse: Float32Array;
  compact: Float32Array;
  model: Float32Array;
  /** data − model, NaN where not used. */
  residual: Float32Array;
  residualNorm: Float32Array;
}

export interface JointSeparationResult {
  settings: ResolvedSeparationSettings;
  settingsDigest: string;
  grid: {
    width: number;
    height: number;
    factor: number;
    scaleArcsec: number;
    paddedWidth: number;
    paddedHeight: number;
  };
  gridInfo: CommonGrid;
  /** s and u on the common grid, in the reference's unit per common pixel. */
  diffuseSky: Float32Array;
  compactSky: Float32Array;
  images: JointImageResult[];
  catalogue: CatalogueSource[];
  /** Which image the sources were refined on: the reference, or the sharpest (positions then carried over). */
  refinement: 'reference-image' | 'sharpest-image';
  /** 0-based index of that image. */
  catalogueImage: number;
  sharpestImage: number;
  spectrum: JointFitResult['spectrum'];
  compactPrior: { alpha: number; q: number; pedestal: number; fluxErrorScale: number };
  scalePriorWidth: number;
  warnings: string[];
  iterations: number;
  evaluations: number;
  objective: number;
  converged: boolean;
  trace: JointFitResult['trace'];
  seedsPerRound: number[];
  timings: { fit: number; catalogue: number; total: number };
}

function fail(message: string): never {
  throw new Error(message);
}

function validPixels(image: JointInputImage): Uint8Array {
  const { width, height, data, name } = image;
  if (
    !Number.isInteger(width) ||
    !Number.isInteger(height) ||
    width < MIN_IMAGE_SIDE ||
    height < MIN_IMAGE_SIDE
  ) {
    fail(
      `${name} is ${width} × ${height} pixels; separation needs at least ${MIN_IMAGE_SIDE} × ${MIN_IMAGE_SIDE}`,
    );
  }
  const n = width * height;
  if (!data || data.length !== n)
    fail(`${name}: data has ${data?.length ?? 0} values; ${width} × ${height} needs ${n}`);
  if (image.mask && image.mask.length !== n)
    fail(`${name}: mask has ${image.mask.length} values; it needs ${n}`);
  const valid = new Uint8Array(n);
  let count = 0;
  for (let i = 0; i < n; i++) {
    if ((!image.mask || image.mask[i] !== 0) && Number.isFinite(data[i]!)) {
      valid[i] = 1;
      count++;
    }
  }
  if (count < MIN_IMAGE_SIDE * MIN_IMAGE_SIDE)
    fail(
      `${name}: only ${count} pixels are valid; separation needs at least ${MIN_IMAGE_SIDE * MIN_IMAGE_SIDE}`,
    );
  return valid;
}

function celestialWcs(image: JointInputImage): Wcs {
  if (!image.wcs || !image.wcs.isCelestial) {
    fail(
      `${image.name} has no celestial WCS (RA/Dec or galactic axes): a joint fit needs every image placed on the sky`,
    );
  }
  const [sx, sy] = image.wcs.pixelScaleDeg();
  if (!(sx > 0) || Math.abs(sx - sy) > 0.01 * sx) {
    fail(`${image.name}: pixels are not square (${sx}° × ${sy}°); a joint fit needs square pixels`);
  }
  return image.wcs;
}

/** The PSF of an image in its own pixels and at the common scale. */
function choosePsfs(
  image: JointInputImage,
  wcs: Wcs,
  given: PerImageSettings['psf'] | null,
  grid: CommonGrid,
): { own: Psf; common: Psf } {
  const scale = meanPixelScaleDeg(wcs);
  const ratio = scale / grid.scaleDeg;
  const eastLeft = wcs.cdelt1Sign() < 0;
  const gridEastLeft = grid.cdelt1Sign < 0;
  if (given) {
    return {
      own: psfFromFwhm(given.fwhmMajor, given.fwhmMinor, given.pa, eastLeft),
      common: psfFromFwhm(given.fwhmMajor * ratio, given.fwhmMinor * ratio, given.pa, gridEastLeft),
    };
  }
  if (image.beam) {
    return {
      own: psfFromBeam(image.beam, scale, wcs.cdelt1Sign()),
      common: psfFromBeam(image.beam, grid.scaleDeg, grid.cdelt1Sign),
    };
  }
  if (image.psf) {
    if (image.psf.kind === 'image' && Math.abs(ratio - 1) > 0.01) {
      fail(
        `${image.name}: its PSF is an image at ${(scale * 3600).toPrecision(4)}″ per pixel, but the common grid has ${(grid.scaleDeg * 3600).toPrecision(4)}″; give a Gaussian PSF (FWHMs) for it`,
      );
    }
    return { own: image.psf, common: image.psf };
  }
  return fail(
    `${image.name}: no PSF (no BMAJ/BMIN/BPA in its header and none given); give its PSF FWHMs in its own pixels`,
  );
}

const toFloat32 = (a: Float64Array): Float32Array => Float32Array.from(a);

export async function separateJoint(
  images: JointInputImage[],
  settingsInput: unknown,
  options: JointOptions = {},
): Promise<JointSeparationResult> {
  const started = performance.now();
  if (images.length < 2) fail(`A joint fit needs at least two images (got ${images.length})`);
  const settings = resolveSettings(settingsInput);
  const perImage = (i: number): PerImageSettings => options.perImage?.[i] ?? {};
  const scalePriorWidth = options.scalePriorWidth ?? 0.05;
  if (!(scalePriorWidth > 0 && scalePriorWidth <= 1))
    fail(`The flux-scale prior width must be between 0 and 1 (got ${scalePriorWidth})`);
  const names = images.map((img, i) => `image ${i + 1} (${img.name})`);
  const valids = images.map((img, i) => validPixels({ ...img, name: names[i]! }));
  const wcss = images.map((img, i) => celestialWcs({ ...img, name: names[i]! }));
  const ref = images[0]!;
  const refWcs = wcss[0]!;
  for (let i = 1; i < images.length; i++) frameConversion(refWcs, wcss[i]!, [names[0]!, names[i]!]);
  const finest = Math.min(...wcss.map(meanPixelScaleDeg));
  const grid = commonGrid(refWcs, ref.width, ref.height, finest, options.gridFactor);
  const warnings: string[] = [];

  // PSFs, units, noise, resampling.
  const psfs = images.map((img, i) =>
    choosePsfs(
      { ...img, name: names[i]! },
      wcss[i]!,
      perImage(i).psf ?? (i === 0 ? settings.psf : null),
      grid,
    ),
  );
  const units = images.map((img, i) => parseBrightnessUnit(perImage(i).unit ?? img.unit ?? ''));
  const gainsOut = unitGains(
    images.map((img, i) => ({
      unit: units[i]!,
      beamAreaPx: psfBeamAreaPx(psfs[i]!.own),
      pixelSteradian: (meanPixelScaleDeg(wcss[i]!) * (Math.PI / 180)) ** 2,
    })),
    names,
  );
  warnings.push(...gainsOut.warnings);

  const prepared = images.map((img, i) => {
    const name = names[i]!;
    const wcs = wcss[i]!;
    const n = img.width * img.height;
    const valid = valids[i]!;
    const resampler = buildResampler(
      grid.width,
      grid.height,
      img.width,
      img.height,
      commonToImageMap(grid, wcs, [names[0]!, name]),
    );
    let outside = 0;
    let used = 0;
    for (let j = 0; j < n; j++) {
      if (!valid[j]) continue;
      if (resampler.coverage[j]! < 0.999) {
        valid[j] = 0;
        outside++;
      } else used++;
    }
    if (used === 0) {
      fail(
        `${name} does not overlap the footprint of the reference image (${names[0]}): nothing to fit jointly`,
      );
    }
    if (used < MIN_IMAGE_SIDE * MIN_IMAGE_SIDE) {
      fail(
        `${name} overlaps the reference image (${names[0]}) on only ${used} valid pixels; a joint fit needs at least ${MIN_IMAGE_SIDE * MIN_IMAGE_SIDE}`,
      );
    }
    if (outside > 0)
      warnings.push(`${name}: ${outside} valid pixels lie outside the reference footprint and are not used`);
    const data = new Float64Array(n);
    for (let j = 0; j < n; j++) data[j] = valid[j] ? img.data[j]! : 0;
    const likelihood = perImage(i).likelihood ?? settings.likelihood;
    const givenSigma = perImage(i).noiseSigma ?? (i === 0 ? settings.noiseSigma : null);
    let sigma: number | null = null;
    let sigmaSource: JointImageResult['sigmaSource'] = null;
    let noise: { kind: 'gaussian'; sigma: number | Float64Array } | { kind: 'poisson' };
    if (likelihood === 'poisson') {
      for (let j = 0; j < n; j++) {
        if (!valid[j]) continue;
        const v = data[j]!;
        if (v < 0 || Math.abs(v - Math.round(v)) > 1e-6 * Math.max(1, Math.abs(v))) {
          fail(
            `${name}: the Poisson likelihood needs counts (whole numbers ≥ 0), but pixel (${(j % img.width) + 1}, ${Math.floor(j / img.width) + 1}) holds ${v}; use the gaussian likelihood for this image`,
          );
        }
        data[j] = Math.round(v);
      }
      noise = { kind: 'poisson' };
    } else if (givenSigma != null) {
      if (!(givenSigma > 0 && Number.isFinite(givenSigma)))
        fail(`${name}: noise σ must be positive (got ${givenSigma})`);
      sigma = givenSigma;
      sigmaSource = 'given';
      noise = { kind: 'gaussian', sigma };
    } else if (img.sigmaMap) {
      if (img.sigmaMap.length !== n) fail(`${name}: σ map has ${img.sigmaMap.length} values; it needs ${n}`);
      const map = new Float64Array(n);
      const values: number[] = [];
      for (let j = 0; j < n; j++) {
        if (!valid[j]) continue;
        const s = img.sigmaMap[j]!;
        if (!(s > 0) || !Number.isFinite(s)) fail(`${name}: σ map must be positive on every valid pixel`);
        map[j] = s;
        values.push(s);
      }
      values.sort((a, b) => a - b);
      sigma = values[values.length >> 1]!;
      sigmaSource = 'map';
      noise = { kind: 'gaussian', sigma: map };
    } else {
      sigma = estimateNoiseSigma(data, img.width, img.height, valid).sigma;
      sigmaSource = 'estimated';
      noise = { kind: 'gaussian', sigma };
    }
    const ratio = meanPixelScaleDeg(wcs) / grid.scaleDeg;
    return {
      name,
      data,
      valid,
      noise,
      likelihood,
      sigma,
      sigmaSource,
      resampler,
      toCommon: imageToCommonMap(grid, wcs, [names[0]!, name]),
      pixelArea: ratio * ratio,
      used,
      outside,
    };
  });
  options.signal?.throwIfAborted();

  const t1 = performance.now();
  const fit = jointFit(
    grid.width,
    grid.height,
    images.map((img, i) => ({
      width: img.width,
      height: img.height,
      data: prepared[i]!.data,
      valid: prepared[i]!.valid,
      noise: prepared[i]!.noise,
      psf: psfs[i]!.own,
      commonPsf: psfs[i]!.common,
      resampler: prepared[i]!.resampler,
      toCommon: prepared[i]!.toCommon,
      gain: gainsOut.gains[i]!,
      pixelArea: prepared[i]!.pixelArea,
    })),
    {
      alpha: settings.compactAlpha,
      qRelative: settings.compactScale,
      spectrum: { amplitude: settings.diffuseAmplitude, slope: settings.diffuseSlope, estimate: true },
      seedRounds: settings.seedRounds,
      seedSnr: settings.seedSnr,
      maxIterations: settings.maxIterations,
      absoluteDecrease: settings.absoluteDecrease,
      scalePriorWidth,
      fitScales: options.fitScales,
      changeTolerance: options.changeTolerance,
      onProgress: options.onProgress,
      signal: options.signal,
    },
  );
  const tFit = performance.now() - t1;
  options.signal?.throwIfAborted();

  // Catalogue: refined on the sharpest image (the reference when it is the sharpest), then expressed in the
  // reference's pixels, flux convention and frame.
  const t2 = performance.now();
  const k = fit.sharpest;
  const rk = prepared[k]!;
  const imgK = images[k]!;
  let scaleK = fit.scales[k]!.value * gainsOut.gains[k]!;
  const compactK = new Float64Array(imgK.width * imgK.height);
  rk.resampler.apply(fit.compactSky, compactK);
  for (let j = 0; j < compactK.length; j++) compactK[j] = compactK[j]! * scaleK;
  const perBeam = units[0]!.per === 'beam';
  const refBeamArea = psfBeamAreaPx(psfs[0]!.own);
  let catalogue = extractSources({
    width: imgK.width,
    height: imgK.height,
    data: rk.data,
    mask: rk.valid,
    noise: rk.noise,
    background: fit.perImage[k]!.diffuse,
    compactSky: compactK,
    psf: psfs[k]!.own,
    threshold: settings.threshold,
    wcs: wcss[k]!,
    beamAreaPx: k === 0 && perBeam ? refBeamArea : null,
    pedestal: fit.pedestal * scaleK * rk.pixelArea,
  });
  const mapScales = fit.scales.map((c) => c.value);
  if ((options.polishScales ?? true) && options.fitScales !== false && catalogue.length > 0) {
    const polished = polishScales({
      width: grid.width,
      height: grid.height,
      paddedWidth: fit.paddedWidth,
      paddedHeight: fit.paddedHeight,
      compactSky: fit.compactSky,
      pedestal: fit.pedestal,
      sources: catalogue.map((c) => ({ x: c.x - 1, y: c.y - 1, flux: c.flux })),
      toCommon: rk.toCommon,
      catalogueScale: scaleK,
      catalogueFwhm: psfFwhmPx(psfs[k]!.common).major,
      images: images.map((_, i) => ({
        data: prepared[i]!.data,
        valid: prepared[i]!.valid,
        noise: prepared[i]!.noise,
        diffuse: fit.perImage[i]!.diffuse,
        commonPsf: psfs[i]!.common,
        resampler: prepared[i]!.resampler,
        gain: gainsOut.gains[i]!,
        scale: fit.scales[i]!.value,
      })),
      scaleSigma: Math.log(1 + scalePriorWidth),
    });
    polished.scales.forEach((value, i) => {
      if (i === 0) return;
      const ratio = value / fit.scales[i]!.value;
      const parts = fit.perImage[i]!;
      for (const a of [parts.model, parts.diffuse, parts.compact])
        for (let j = 0; j < a.length; j++) a[j] = a[j]! * ratio;
      fit.scales[i]!.value = value;
      fit.scales[i]!.error *= ratio;
    });
    // the catalogue image's fluxes are in its own values; its c·g converts them to the reference's
    scaleK = fit.scales[k]!.value * gainsOut.gains[k]!;
  }
  if (k !== 0)
    catalogue = toReference(catalogue, wcss[k]!, refWcs, scaleK, perBeam ? refBeamArea : null, [
      names[k]!,
      names[0]!,
    ]);
  const tCatalogue = performance.now() - t2;

  const imageResults = images.map((img, i): JointImageResult => {
    const p = prepared[i]!;
    const parts = fit.perImage[i]!;
    const n = img.width * img.height;
    const residual = new Float32Array(n);
    const residualNorm = new Float32Array(n);
    for (let j = 0; j < n; j++) {
      if (!p.valid[j]) {
        residual[j] = NaN;
        residualNorm[j] = NaN;
        continue;
      }
      const r = p.data[j]! - parts.model[j]!;
      residual[j] = r;
      if (p.noise.kind === 'poisson') residualNorm[j] = r / Math.sqrt(Math.max(parts.model[j]!, 1e-6));
      else residualNorm[j] = r / (typeof p.noise.sigma === 'number' ? p.noise.sigma : p.noise.sigma[j]!);
    }
    return {
      name: img.name,
      width: img.width,
      height: img.height,
      psf: psfs[i]!.own,
      psfFwhmPx: psfFwhmPx(psfs[i]!.own),
      beamAreaPx: psfBeamAreaPx(psfs[i]!.own),
      unit: units[i]!.text,
      unitGain: gainsOut.gains[i]!,
      likelihood: p.likelihood,
      sigma: p.sigma,
      sigmaSource: p.sigmaSource,
      pixelsUsed: p.used,
      pixelsOutside: p.outside,
      scale: {
        value: fit.scales[i]!.value,
        error: fit.scales[i]!.error,
        fixed: i === 0 || options.fitScales === false,
        mapValue: mapScales[i]!,
      },
      diffuse: toFloat32(parts.diffuse),
      compact: toFloat32(parts.compact),
      model: toFloat32(parts.model),
      residual,
      residualNorm,
    };
  });

  return {
    settings,
    settingsDigest: settingsDigest(settings),
    grid: {
      width: grid.width,
      height: grid.height,
      factor: grid.factor,
      scaleArcsec: grid.scaleDeg * 3600,
      paddedWidth: fit.paddedWidth,
      paddedHeight: fit.paddedHeight,
    },
    gridInfo: grid,
    diffuseSky: toFloat32(fit.diffuseSky),
    compactSky: toFloat32(fit.compactSky),
    images: imageResults,
    catalogue,
    refinement: fit.sharpest === 0 ? 'reference-image' : 'sharpest-image',
    catalogueImage: fit.sharpest,
    sharpestImage: fit.sharpest,
    spectrum: fit.spectrum,
    compactPrior: { alpha: fit.alpha, q: fit.q, pedestal: fit.pedestal, fluxErrorScale: fit.fluxErrorScale },
    scalePriorWidth,
    warnings,
    iterations: fit.iterations,
    evaluations: fit.evaluations,
    objective: fit.objective,
    converged: fit.converged,
    trace: fit.trace,
    seedsPerRound: fit.seedsPerRound,
    timings: { fit: tFit, catalogue: tCatalogue, total: performance.now() - started },
  };
}

/**
 * Sources measured on image k, re-expressed for the reference: pixel positions through the two WCSs (errors
 * through the local Jacobian of the map, differences over ±½ pixel; the x–y covariance of the measurement is not
 * kept by the catalogue, so it is taken as 0), fluxes divided by image k's c·g (its values per reference flux
 * unit), world positions converted to the reference's frame (their arcsec errors kept as measured, exact when the
 * frames agree).
 */
function toReference(
  catalogue: CatalogueSource[],
  from: Wcs,
  to: Wcs,
  scale: number,
  beamAreaPx: number | null,
  names: [string, string],
): CatalogueSource[] {
  const convert = frameConversion(from, to, names);
  const map = (x: number, y: number): [number, number] => {
    const [lon, lat] = from.pixelToWorld(x, y);
    const [l2, b2] = convert(lon, lat);
    return to.worldToPixel(l2, b2);
  };
  return catalogue.map((c) => {
    const [x, y] = map(c.x, c.y);
    const [xp, yp] = map(c.x + 0.5, c.y);
    const [xm, ym] = map(c.x - 0.5, c.y);
    const [xq, yq] = map(c.x, c.y + 0.5);
    const [xr, yr] = map(c.x, c.y - 0.5);
    const j11 = xp - xm;
    const j21 = yp - ym;
    const j12 = xq - xr;
    const j22 = yq - yr;
    const [lon, lat] = c.ra !== null && c.dec !== null ? convert(c.ra, c.dec) : [NaN, NaN];
    const flux = c.flux / scale;
    const fluxErr = c.fluxErr / scale;
    return {
      ...c,
      x,
      y,
      xErr: Math.hypot(j11 * c.xErr, j12 * c.yErr),
      yErr: Math.hypot(j21 * c.xErr, j22 * c.yErr),
      ra: Number.isFinite(lon) ? lon : null,
      dec: Number.isFinite(lat) ? lat : null,
      flux,
      fluxErr,
      fluxDensity: beamAreaPx ? flux / beamAreaPx : null,
      fluxDensityErr: beamAreaPx ? fluxErr / beamAreaPx : null,
    };
  });
}
