/**
 * From the MAP compact field to a refined source catalogue (METHOD-NOTES, "Catalogue accuracy").
 *
 * 1. Group: the compact excess u − pedestal is smoothed by the PSF into footprints and split into seeds at the
 *    maxima of a lightly smoothed u (group-compact-field.ts). Pairs 1 FWHM apart give two seeds.
 * 2. Refine: every seed is fitted to data − background − pedestal − (other sources) with a local PSF fit (flux and
 *    sub-pixel position), neighbours held at their current fits; the sweep repeats (`sweeps`) so blends settle.
 *    Candidates far below the threshold are dropped after the first sweeps and the rest refitted, so their light
 *    goes back to real neighbours.
 * 3. Errors from the Fisher matrix of the final fit, joint over the sources of a footprint (refine-sources.ts).
 *    SNR = flux/fluxErr. Poisson data also get the likelihood-ratio significance against the background alone,
 *    and the threshold is applied to it (to SNR for Gaussian noise).
 * 4. World positions through the WCS, with errors propagated through the local Jacobian of pixel → world
 *    (finite differences over ±½ pixel), reported on RA·cos(Dec) and Dec in arcsec.
 *
 * Why refine instead of reporting sums of u: on a pixel grid a sum of pixel-centred PSFs is broader than an
 * off-centre PSF, so "flux = Σu" reads a few per cent high, centroids of u are ~2× the Cramér–Rao limit and
 * curvature errors of the MAP objective are far too small (measured, METHOD-NOTES).
 */
import type { CatalogueSource, SourceFlag } from '../../../shared/catalogue';
import { FWHM_PER_SIGMA, psfCovariance, psfFwhmPx, psfStamp, psfStampHalfSize, type Psf } from '../psf';
import { groupCompactField } from './group-compact-field';
import {
  groupErrors,
  poissonSignificance,
  refitSource,
  SourceModel,
  windowFlags,
  type RefinedSource,
  type RefineImage,
  type SourceErrors,
} from './refine-sources';

export type ExtractionNoise = { kind: 'gaussian'; sigma: number | Float64Array } | { kind: 'poisson' };

export interface ExtractionWcs {
  /** FITS 1-based pixel → (RA, Dec) or (lon, lat) in degrees. */
  pixelToWorld(x: number, y: number): [number, number];
  /** When given and false, no world positions are reported. */
  readonly isCelestial?: boolean;
}

export interface ExtractSourcesInput {
  width: number;
  height: number;
  data: Float64Array | Float32Array;
  /** 1 = valid pixel, 0 = masked (blank). */
  mask: Uint8Array;
  noise: ExtractionNoise;
  /** PSF-convolved diffuse model on the image grid, held fixed. */
  background: Float64Array | Float32Array;
  /** MAP compact field u on the image grid (not convolved). */
  compactSky: Float64Array | Float32Array;
  psf: Psf;
  /**
   * Detection threshold: on SNR for Gaussian noise, on the significance for Poisson data.
   * @default 5 (common practice)
   */
  threshold?: number;
  /** @default null (no world positions) */
  wcs?: ExtractionWcs | null;
  /** Beam area in pixels for per-beam units (flux density = flux / beam area); null for other units. @default null */
  beamAreaPx?: number | null;
  /** The "off" level q/α of u per pixel, subtracted from u and from the data model. @default 0 */
  pedestal?: number;
  /** Refinement sweeps: the first three over all sources, the rest over blended ones only. @default 5 */
  sweeps?: number;
}

interface Options {
  threshold: number;
  wcs: ExtractionWcs | null;
  beamAreaPx: number | null;
  pedestal: number;
  sweeps: number;
}

function checkInput(input: ExtractSourcesInput): Options {
  const { width, height } = input;
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 1 || height < 1) {
    throw new Error(`Image size must be whole positive numbers (got ${width} × ${height})`);
  }
  const n = width * height;
  const arrays: [string, { length: number }][] = [
    ['data', input.data],
    ['mask', input.mask],
    ['background', input.background],
    ['compactSky', input.compactSky],
  ];
  for (const [name, array] of arrays) {
    if (array.length !== n)
      throw new Error(`${name} has ${array.length} values; the ${width} × ${height} image needs ${n}`);
  }
  if (input.noise.kind === 'gaussian') {
    const sigma = input.noise.sigma;
    if (typeof sigma === 'number') {
      if (!(sigma > 0) || !Number.isFinite(sigma))
        throw new Error(`Noise σ must be positive and finite (got ${sigma})`);
    } else {
      if (sigma.length !== n) throw new Error(`Noise σ map has ${sigma.length} values; the image needs ${n}`);
      for (let i = 0; i < n; i++) {
        const s = sigma[i] as number;
        if (input.mask[i] && !(s > 0 && Number.isFinite(s))) {
          throw new Error(
            `Noise σ map must be positive and finite on valid pixels (pixel ${(i % width) + 1}, ${Math.floor(i / width) + 1} has ${s})`,
          );
        }
      }
    }
  }
  const threshold = input.threshold ?? 5;
  if (!Number.isFinite(threshold) || threshold <= 0)
    throw new Error(`Detection threshold must be a positive number (got ${threshold})`);
  const pedestal = input.pedestal ?? 0;
  if (!Number.isFinite(pedestal) || pedestal < 0)
    throw new Error(`Pedestal must be a finite number ≥ 0 (got ${pedestal})`);
  const beamAreaPx = input.beamAreaPx ?? null;
  if (beamAreaPx !== null && !(beamAreaPx > 0 && Number.isFinite(beamAreaPx))) {
    throw new Error(`Beam area must be a positive number of pixels (got ${beamAreaPx})`);
  }
  const sweeps = input.sweeps ?? 5;
  if (!Number.isInteger(sweeps) || sweeps < 3 || sweeps > 50)
    throw new Error(`Sweeps must be a whole number 3–50 (got ${sweeps})`);
  const wcs = input.wcs && input.wcs.isCelestial !== false ? input.wcs : null;
  return { threshold, wcs, beamAreaPx, pedestal, sweeps };
}

/** Σ P² of the PSF at zero offset: the flux error of an isolated source is σ/√(Σ P²). */
function psfSumOfSquares(psf: Psf): number {
  const stamp = psfStamp(psf, 0, 0, psfStampHalfSize(psf));
  let s = 0;
  for (const v of stamp.values) s += v * v;
  return s;
}

export function extractSources(input: ExtractSourcesInput): CatalogueSource[] {
  const options = checkInput(input);
  const { width, height, data, mask, psf, background, compactSky } = input;
  const n = width * height;
  const valid = new Uint8Array(n);
  for (let i = 0; i < n; i++) valid[i] = mask[i] && Number.isFinite(data[i] as number) ? 1 : 0;

  const fwhm = psfFwhmPx(psf);
  const covariance = psfCovariance(psf);
  const meanFwhm = Math.sqrt(fwhm.major * fwhm.minor);
  const sumP2 = psfSumOfSquares(psf);

  // Per-pixel noise σ for the grouping levels, and 1/σ² for the fit.
  const sigmaAt = new Float32Array(n); // float32: σ per pixel for thresholds and flags
  let inverseVariance: Float64Array | null = null;
  if (input.noise.kind === 'gaussian') {
    const sigma = input.noise.sigma;
    inverseVariance = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const s = typeof sigma === 'number' ? sigma : (sigma[i] as number);
      sigmaAt[i] = s;
      inverseVariance[i] = valid[i] ? 1 / (s * s) : 0;
    }
  } else {
    for (let i = 0; i < n; i++) {
      // Poisson σ of the background, floored at the σ of a single count spread over the PSF.
      sigmaAt[i] = Math.sqrt(Math.max((background[i] as number) + options.pedestal, sumP2));
    }
  }

  // A source at the threshold peaks at t·σ·√ΣP² in G = PSF ⊛ u. Footprints reach down to 15% of that and
  // seeds need 30%: generous on purpose, the refined fit and the threshold do the selection.
  // (the two levels in float32: they are cuts at fractions of a threshold, and image-sized)
  const floor = new Float32Array(n);
  const seedLevel = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const gThreshold = options.threshold * (sigmaAt[i] as number) * Math.sqrt(sumP2);
    floor[i] = 0.15 * gThreshold;
    seedLevel[i] = 0.3 * gThreshold;
  }
  const excess = new Float32Array(n); // float32, as the fit's compact plane it comes from
  for (let i = 0; i < n; i++)
    excess[i] = valid[i] ? Math.max((compactSky[i] as number) - options.pedestal, 0) : 0;
  const grouping = groupCompactField(excess, width, height, valid, psf, {
    floor,
    seedLevel,
    mergeRadiusPx: 0.6 * meanFwhm,
  });

  const base = new Float64Array(n);
  for (let i = 0; i < n; i++) base[i] = (background[i] as number) + options.pedestal;
  // Model stamps out to 5σ of the major axis: the light beyond (e^(−12.5) of the peak) is < 0.002 σ even for a
  // SNR-1000 source.
  const modelHalfSize =
    psf.kind === 'gaussian'
      ? Math.max(3, Math.ceil((5 * psf.fwhmMajorPx) / FWHM_PER_SIGMA) + 1)
      : Math.max(psfStampHalfSize(psf), 3);
  const image: RefineImage = {
    width,
    height,
    data,
    valid,
    base,
    noise: inverseVariance ? { kind: 'gaussian', inverseVariance } : { kind: 'poisson' },
    psf,
    modelHalfSize,
    windowHalfSize: Math.min(modelHalfSize, Math.max(2, Math.ceil(1.5 * fwhm.major))),
  };
  const fitOptions = { maxShiftPx: Math.max(1, meanFwhm), minSnrForPosition: 2 };

  let sources: RefinedSource[] = grouping.seeds
    .map((s) => ({
      x: s.x,
      y: s.y,
      flux: s.flux,
      seedX: s.x,
      seedY: s.y,
      footprint: s.footprint,
      positionFixed: true,
    }))
    .sort((a, b) => b.flux - a.flux);
  let model = new SourceModel(image);
  for (const s of sources) model.add(s, 1);

  const detectionValue = (s: RefinedSource, fluxErr: number): number =>
    image.noise.kind === 'poisson' ? poissonSignificance(image, model, s) : s.flux / fluxErr;
  const isolatedFluxErr = (s: RefinedSource): number => {
    const k = Math.round(s.y) * width + Math.round(s.x);
    const sigma =
      image.noise.kind === 'poisson'
        ? Math.sqrt(Math.max((base[k] ?? 0) + Math.max(s.flux, 0) * sumP2, sumP2))
        : (sigmaAt[k] ?? 1);
    return sigma / Math.sqrt(sumP2);
  };

  const sweep = (count: number): void => {
    for (let pass = 0; pass < count; pass++) {
      for (const s of sources) refitSource(image, model, s, fitOptions);
    }
  };
  const rebuild = (kept: RefinedSource[]): void => {
    sources = kept;
    model = new SourceModel(image);
    for (const s of sources) model.add(s, 1);
  };
  const mergeClose = (): RefinedSource[] => {
    const kept: RefinedSource[] = [];
    for (const s of [...sources].sort((a, b) => b.flux - a.flux)) {
      if (kept.some((k) => Math.hypot(k.x - s.x, k.y - s.y) < 0.5 * meanFwhm)) continue;
      kept.push(s);
    }
    return kept;
  };

  // Sweeps 1–2, then drop candidates far below the threshold (and duplicates that converged onto one source).
  // Then one sweep over everything (light of dropped candidates goes back to neighbours) and the remaining sweeps
  // over blends only: an isolated source's fit does not change when nothing around it does.
  sweep(Math.min(2, options.sweeps));
  rebuild(mergeClose().filter((s) => detectionValue(s, isolatedFluxErr(s)) >= 0.5 * options.threshold));
  sweep(1);
  const members = new Map<number, number>();
  for (const s of sources) members.set(s.footprint, (members.get(s.footprint) ?? 0) + 1);
  const inBlends = sources.filter((s) => (members.get(s.footprint) ?? 0) > 1);
  for (let pass = 0; pass < options.sweeps - 3; pass++)
    for (const s of inBlends) refitSource(image, model, s, fitOptions);

  // Errors jointly per footprint (refine-sources.ts), then the threshold.
  interface Measured {
    source: RefinedSource;
    errors: SourceErrors;
    detection: number;
  }
  const measureFootprints = (footprints: Set<number> | null): Measured[] => {
    const byFootprint = new Map<number, RefinedSource[]>();
    for (const s of sources) {
      if (footprints && !footprints.has(s.footprint)) continue;
      const list = byFootprint.get(s.footprint) ?? [];
      list.push(s);
      byFootprint.set(s.footprint, list);
    }
    const out: Measured[] = [];
    for (const group of byFootprint.values()) {
      const errors = groupErrors(image, model, group);
      group.forEach((s, k) => {
        const e = errors[k] as SourceErrors;
        out.push({ source: s, errors: e, detection: detectionValue(s, e.fluxErr) });
      });
    }
    return out;
  };
  const passes = (m: Measured): boolean =>
    m.detection >= options.threshold && Number.isFinite(m.errors.fluxErr);

  // Prune below the threshold one source per footprint at a time (the weakest), refitting and re-measuring only
  // that footprint in between: a source the MAP fit split over two close seeds then comes back whole instead of
  // losing both halves to their anti-correlated errors.
  const measured = new Map<RefinedSource, Measured>();
  for (const m of measureFootprints(null)) measured.set(m.source, m);
  for (let round = 0; round < 50; round++) {
    const weakest = new Map<number, Measured>();
    for (const m of measured.values()) {
      if (passes(m)) continue;
      const current = weakest.get(m.source.footprint);
      if (!current || m.detection < current.detection) weakest.set(m.source.footprint, m);
    }
    if (weakest.size === 0) break;
    for (const m of weakest.values()) {
      model.add(m.source, -1);
      measured.delete(m.source);
    }
    const dropped = new Set([...weakest.values()].map((m) => m.source));
    sources = sources.filter((s) => !dropped.has(s));
    const touchedFootprints = new Set(weakest.keys());
    const touched = sources.filter((s) => touchedFootprints.has(s.footprint));
    if (touched.length === 0) continue;
    for (let pass = 0; pass < 2; pass++) for (const s of touched) refitSource(image, model, s, fitOptions);
    for (const m of measureFootprints(touchedFootprints)) measured.set(m.source, m);
  }
  const kept = [...measured.values()].filter(passes);

  const perFootprint = new Map<number, number>();
  for (const m of kept) perFootprint.set(m.source.footprint, (perFootprint.get(m.source.footprint) ?? 0) + 1);

  kept.sort((a, b) => b.source.flux - a.source.flux);
  return kept.map((m, index): CatalogueSource => {
    const s = m.source;
    const e = m.errors;
    const flags: SourceFlag[] = [];
    const wf = windowFlags(image, s.x, s.y);
    if (wf.edge) flags.push('edge');
    if (wf.nearMask) flags.push('near-mask');
    if ((perFootprint.get(s.footprint) ?? 0) > 1) flags.push('blended');
    const x = s.x + 1;
    const y = s.y + 1;
    // A position held at its seed (too faint to fit one) gets the PSF σ per axis as a conservative error.
    const xErr = Number.isFinite(e.xErr) ? e.xErr : Math.sqrt(covariance.xx);
    const yErr = Number.isFinite(e.yErr) ? e.yErr : Math.sqrt(covariance.yy);
    let ra: number | null = null;
    let dec: number | null = null;
    let raErrArcsec: number | null = null;
    let decErrArcsec: number | null = null;
    if (options.wcs) {
      const world = worldPosition(options.wcs, x, y, xErr, yErr, Number.isFinite(e.xErr) ? e.xyCov : 0);
      if (world) ({ ra, dec, raErrArcsec, decErrArcsec } = world);
    }
    return {
      id: index + 1,
      x,
      y,
      xErr,
      yErr,
      ra,
      dec,
      raErrArcsec,
      decErrArcsec,
      flux: s.flux,
      fluxErr: e.fluxErr,
      fluxDensity: options.beamAreaPx ? s.flux / options.beamAreaPx : null,
      fluxDensityErr: options.beamAreaPx ? e.fluxErr / options.beamAreaPx : null,
      snr: s.flux / e.fluxErr,
      significance: image.noise.kind === 'poisson' ? m.detection : null,
      flags,
    };
  });
}

/** World position and its errors (arcsec on RA·cos Dec and Dec) from the pixel covariance and the local Jacobian. */
function worldPosition(
  wcs: ExtractionWcs,
  x: number,
  y: number,
  xErr: number,
  yErr: number,
  xyCov: number,
): { ra: number; dec: number; raErrArcsec: number | null; decErrArcsec: number | null } | null {
  const [ra, dec] = wcs.pixelToWorld(x, y);
  if (!Number.isFinite(ra) || !Number.isFinite(dec)) return null;
  if (!Number.isFinite(xErr) || !Number.isFinite(yErr))
    return { ra, dec, raErrArcsec: null, decErrArcsec: null };
  const cosDec = Math.cos((dec * Math.PI) / 180);
  const wrap = (d: number): number => ((((d + 180) % 360) + 360) % 360) - 180;
  const [rxp, dxp] = wcs.pixelToWorld(x + 0.5, y);
  const [rxm, dxm] = wcs.pixelToWorld(x - 0.5, y);
  const [ryp, dyp] = wcs.pixelToWorld(x, y + 0.5);
  const [rym, dym] = wcs.pixelToWorld(x, y - 0.5);
  // Jacobian of (RA·cos Dec, Dec) with respect to (x, y), degrees per pixel.
  const j11 = wrap(rxp - rxm) * cosDec;
  const j12 = wrap(ryp - rym) * cosDec;
  const j21 = dxp - dxm;
  const j22 = dyp - dym;
  const varRa = j11 * j11 * xErr * xErr + 2 * j11 * j12 * xyCov + j12 * j12 * yErr * yErr;
  const varDec = j21 * j21 * xErr * xErr + 2 * j21 * j22 * xyCov + j22 * j22 * yErr * yErr;
  return {
    ra,
    dec,
    raErrArcsec: Math.sqrt(Math.max(varRa, 0)) * 3600,
    decErrArcsec: Math.sqrt(Math.max(varDec, 0)) * 3600,
  };
}
