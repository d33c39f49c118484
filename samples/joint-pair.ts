/**
 * One true sky observed twice, for the joint fit's tests: a sharp image on a fine grid and a smooth one on a
 * grid `factor` times coarser with the same tangent point and footprint, both with celestial TAN headers and
 * restoring beams, in Jy/beam (part of the invented Lyra Deep Field of the Aster Wide Survey).
 *
 * The sky (Jy per fine pixel): a log-normal diffuse field drawn on a padded fine grid (powerLawGaussianField of
 * sky-simulator.ts) and point sources with Euclidean counts (drawPowerLawFlux) at sub-pixel positions.
 * - sharp image: (PSF_a ⊛ diffuse) on the fine grid + pixel-integrated PSF_a stamps, times its beam area in
 *   pixels (Jy → Jy/beam), plus Gaussian noise σ_a;
 * - smooth image: PSF_b ⊛ diffuse on the fine grid, summed over factor × factor blocks (the coarse pixel's
 *   flux), + PSF_b stamps integrated over the coarse pixels at the sources' coarse positions, times its beam area
 *   in its pixels and a flux-scale error (e.g. 1.07), plus noise σ_b.
 * A fine pixel (x, y) (0-based) lies at coarse ((x + ½)/f − ½, (y + ½)/f − ½).
 */
import { createConvolver, goodFftSize } from '../server/engine/fft';
import type { HeaderCard } from '../server/engine/io/header-card';
import {
  addStampToImage,
  psfBeamAreaPx,
  psfFromFwhm,
  psfKernelOnGrid,
  psfStamp,
  psfStampHalfSize,
  type GaussianPsf,
} from '../server/engine/psf';
import { parseWcs } from '../server/engine/wcs/wcs';
import { SeededRandom } from './random';
import { drawPowerLawFlux, powerLawGaussianField } from './sky-simulator';

export interface JointPairOptions {
  /** Fine image side (pixels); a multiple of `factor`. */
  size: number;
  seed: number;
  /** Coarse pixel = factor fine pixels. @default 2 */
  factor?: number;
  sharp: { fwhmPx: number; sigma: number };
  /** Beam FWHM in fine pixels. */
  smooth: { fwhmFinePx: number; sigma: number; scaleError: number };
  diffuse: { level: number; logStd: number; slope: number };
  /** Fluxes in Jy. */
  sources: { count: number; minFlux: number; maxFlux: number; minSeparationPx?: number; marginPx?: number };
  wcs?: { raDeg: number; decDeg: number; pixelArcsec: number };
}

export interface PairImage {
  width: number;
  height: number;
  image: Float64Array;
  mask: Uint8Array;
  header: HeaderCard[];
  psf: GaussianPsf;
  beamAreaPx: number;
  sigma: number;
}

export interface PairSource {
  /** 0-based fine-grid position. */
  x: number;
  y: number;
  /** Jy */
  flux: number;
  ra: number;
  dec: number;
}

export interface JointPair {
  sharp: PairImage;
  smooth: PairImage;
  truth: {
    /** Jy per fine pixel. */
    diffuseSky: Float64Array;
    sources: PairSource[];
    scaleError: number;
  };
}

function header(
  crpix: [number, number],
  scaleDeg: number,
  fwhmPx: number,
  raDeg: number,
  decDeg: number,
): HeaderCard[] {
  return [
    { keyword: 'CTYPE1', value: 'RA---TAN' },
    { keyword: 'CTYPE2', value: 'DEC--TAN' },
    { keyword: 'CRPIX1', value: crpix[0], real: true },
    { keyword: 'CRPIX2', value: crpix[1], real: true },
    { keyword: 'CRVAL1', value: raDeg, real: true },
    { keyword: 'CRVAL2', value: decDeg, real: true },
    { keyword: 'CDELT1', value: -scaleDeg, real: true },
    { keyword: 'CDELT2', value: scaleDeg, real: true },
    { keyword: 'CUNIT1', value: 'deg' },
    { keyword: 'CUNIT2', value: 'deg' },
    { keyword: 'RADESYS', value: 'ICRS' },
    { keyword: 'BMAJ', value: fwhmPx * scaleDeg, real: true },
    { keyword: 'BMIN', value: fwhmPx * scaleDeg, real: true },
    { keyword: 'BPA', value: 0, real: true },
    { keyword: 'BUNIT', value: 'Jy/beam' },
    { keyword: 'OBJECT', value: 'Lyra Deep Field' },
    { keyword: 'TELESCOP', value: 'Aster Wide Survey' },
  ];
}

export function simulateJointPair(options: JointPairOptions): JointPair {
  const f = options.factor ?? 2;
  const size = options.size;
  if (!Number.isInteger(size) || size % f !== 0 || size < 16 * f) {
    throw new Error(`Fine image side must be a multiple of ${f} and at least ${16 * f} (got ${size})`);
  }
  const coarse = size / f;
  const random = new SeededRandom(options.seed);
  const wcs = options.wcs ?? { raDeg: 279.2, decDeg: 38.8, pixelArcsec: 2 };
  const scaleDeg = wcs.pixelArcsec / 3600;
  const psfA = psfFromFwhm(options.sharp.fwhmPx, options.sharp.fwhmPx, 0, true);
  const psfBFine = psfFromFwhm(options.smooth.fwhmFinePx, options.smooth.fwhmFinePx, 0, true);
  const psfB = psfFromFwhm(options.smooth.fwhmFinePx / f, options.smooth.fwhmFinePx / f, 0, true);
  const areaA = psfBeamAreaPx(psfA);
  const areaB = psfBeamAreaPx(psfB);

  // Diffuse sky in Jy per fine pixel; `level` is the median in the sharp image's Jy/beam.
  const pad = Math.max(psfStampHalfSize(psfBFine), Math.ceil(size / 4));
  const pw = goodFftSize(size + 2 * pad);
  const phi = powerLawGaussianField(pw, pw, options.diffuse.slope, random);
  const sky = new Float64Array(pw * pw);
  for (let i = 0; i < sky.length; i++)
    sky[i] = (options.diffuse.level / areaA) * Math.exp(options.diffuse.logStd * phi[i]!);
  const convolve = (psf: GaussianPsf): Float64Array => {
    const out = new Float64Array(pw * pw);
    const c = createConvolver(pw, pw, psfKernelOnGrid(psf, pw, pw));
    try {
      c.apply(sky, out);
    } finally {
      c.dispose();
    }
    return out;
  };
  const convA = convolve(psfA);
  const convB = convolve(psfBFine);
  const diffuseSky = new Float64Array(size * size);
  const sharpModel = new Float64Array(size * size);
  const smoothModel = new Float64Array(coarse * coarse);
  for (let y = 0; y < size; y++) {
    for (let x = 0; x < size; x++) {
      const p = (y + pad) * pw + x + pad;
      diffuseSky[y * size + x] = sky[p]!;
      sharpModel[y * size + x] = convA[p]! * areaA;
      const c = Math.floor(y / f) * coarse + Math.floor(x / f);
      smoothModel[c] = smoothModel[c]! + convB[p]! * areaB * options.smooth.scaleError;
    }
  }

  // Sources.
  const so = options.sources;
  const margin = so.marginPx ?? 0;
  const placed: { x: number; y: number; flux: number }[] = [];
  let attempts = 0;
  while (placed.length < so.count) {
    if (++attempts > 1000 * (so.count + 1)) throw new Error(`Cannot place ${so.count} sources`);
    const x = margin - 0.5 + random.uniform() * (size - 2 * margin);
    const y = margin - 0.5 + random.uniform() * (size - 2 * margin);
    const sep = so.minSeparationPx ?? 0;
    if (sep > 0 && placed.some((p) => (p.x - x) ** 2 + (p.y - y) ** 2 < sep * sep)) continue;
    placed.push({ x, y, flux: drawPowerLawFlux(random, so.minFlux, so.maxFlux, 2.5) });
  }
  const hA = psfStampHalfSize(psfA);
  const hB = psfStampHalfSize(psfB);
  for (const s of placed) {
    let cx = Math.round(s.x);
    let cy = Math.round(s.y);
    addStampToImage(
      sharpModel,
      size,
      size,
      psfStamp(psfA, s.x - cx, s.y - cy, hA).values,
      hA,
      cx,
      cy,
      s.flux * areaA,
    );
    const xc = (s.x + 0.5) / f - 0.5;
    const yc = (s.y + 0.5) / f - 0.5;
    cx = Math.round(xc);
    cy = Math.round(yc);
    addStampToImage(
      smoothModel,
      coarse,
      coarse,
      psfStamp(psfB, xc - cx, yc - cy, hB).values,
      hB,
      cx,
      cy,
      s.flux * areaB * options.smooth.scaleError,
    );
  }

  const noisy = (model: Float64Array, sigma: number): Float64Array =>
    Float64Array.from(model, (m) => m + sigma * random.normal());
  const sharpHeader = header(
    [(size + 1) / 2, (size + 1) / 2],
    scaleDeg,
    options.sharp.fwhmPx,
    wcs.raDeg,
    wcs.decDeg,
  );
  // Same tangent point and footprint: fine pixel p (1-based) is coarse pixel (p − ½)/f + ½.
  const crpixCoarse = ((size + 1) / 2 - 0.5) / f + 0.5;
  const smoothHeader = header(
    [crpixCoarse, crpixCoarse],
    scaleDeg * f,
    options.smooth.fwhmFinePx / f,
    wcs.raDeg,
    wcs.decDeg,
  );
  const sharpWcs = parseWcs(sharpHeader)!;
  return {
    sharp: {
      width: size,
      height: size,
      image: noisy(sharpModel, options.sharp.sigma),
      mask: new Uint8Array(size * size).fill(1),
      header: sharpHeader,
      psf: psfA,
      beamAreaPx: areaA,
      sigma: options.sharp.sigma,
    },
    smooth: {
      width: coarse,
      height: coarse,
      image: noisy(smoothModel, options.smooth.sigma),
      mask: new Uint8Array(coarse * coarse).fill(1),
      header: smoothHeader,
      psf: psfB,
      beamAreaPx: areaB,
      sigma: options.smooth.sigma,
    },
    truth: {
      diffuseSky,
      sources: placed.map((s) => {
        const [ra, dec] = sharpWcs.pixelToWorld(s.x + 1, s.y + 1);
        return { ...s, ra, dec };
      }),
      scaleError: options.smooth.scaleError,
    },
  };
}
