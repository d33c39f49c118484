/**
 * The common sky grid of a joint fit and the pixel maps from it to every image.
 *
 * The grid covers the reference image's footprint (the first image) with its projection and orientation, its
 * pixel f times finer, f the whole number nearest to (reference pixel / finest pixel) rounded up when within 5%
 * (by default the finest pixel scale among the images; f = 1 when the reference is the finest). A reference
 * pixel is then exactly f × f common pixels: common pixel p (FITS, 1-based) ↔ reference pixel (p − ½)/f + ½.
 *
 * Celestial frames: images in the same frame are mapped directly; ICRS and FK5 (J2000) are taken as the same
 * (they differ by less than 0.03″, far below any pixel here); galactic ↔ ICRS/FK5 J2000 by the rotation matrix
 * of the Hipparcos catalogue (ESA 1997, vol. 1, section 1.5.3, eq. 1.5.11). Any other pair is refused.
 */
import type { HeaderCard } from '../io/header-card';
import type { Wcs, WcsFrame } from '../wcs/wcs';
import type { PixelMap } from './resample';

export interface CommonGrid {
  width: number;
  height: number;
  /** Common pixels per reference pixel along each axis. */
  factor: number;
  /** Pixel scale, degrees (geometric mean of the two axes). */
  scaleDeg: number;
  /** FITS 1-based common pixel → world in the reference frame. */
  pixelToWorld(x: number, y: number): [number, number];
  worldToPixel(lon: number, lat: number): [number, number];
  frame: WcsFrame;
  /** The reference's equinox (FK4/FK5 frames), else null. */
  equinox: number | null;
  /** Parity (−1: east to the left), as Wcs.cdelt1Sign. */
  cdelt1Sign: 1 | -1;
}

export function meanPixelScaleDeg(wcs: Wcs): number {
  const [sx, sy] = wcs.pixelScaleDeg();
  return Math.sqrt(sx * sy);
}

/** The grid from the reference WCS and size and the finest scale among the images (or a given factor). */
export function commonGrid(
  reference: Wcs,
  width: number,
  height: number,
  finestScaleDeg: number,
  factor?: number,
): CommonGrid {
  const ratio = meanPixelScaleDeg(reference) / finestScaleDeg;
  const f = factor ?? Math.max(1, Math.ceil(ratio - 0.05));
  if (!Number.isInteger(f) || f < 1 || f > 8) {
    throw new Error(`The common grid factor must be a whole number 1–8 (got ${f})`);
  }
  return {
    width: f * width,
    height: f * height,
    factor: f,
    scaleDeg: meanPixelScaleDeg(reference) / f,
    pixelToWorld: (x, y) => reference.pixelToWorld((x - 0.5) / f + 0.5, (y - 0.5) / f + 0.5),
    worldToPixel: (lon, lat) => {
      const [px, py] = reference.worldToPixel(lon, lat);
      return [f * (px - 0.5) + 0.5, f * (py - 0.5) + 0.5];
    },
    frame: reference.frame!,
    equinox: reference.equinox,
    cdelt1Sign: reference.cdelt1Sign(),
  };
}

/**
 * Header cards of the common grid: the reference's WCS cards with CRPIX and the CD matrix rescaled by f. SIP
 * distortion cards cannot be rescaled this simply and are left out (the fit itself maps through the reference's
 * full WCS; commonGridDropsSip tells the caller to say so).
 */
export function commonGridHeader(
  grid: CommonGrid,
  reference: Wcs,
  header: readonly HeaderCard[],
): HeaderCard[] {
  if (grid.factor === 1) return [...header];
  const f = grid.factor;
  const drop =
    /^(CDELT[12]|CD[12]_[12]|PC[12]_[12]|CROTA[12]|CRPIX[12]|A_.*|B_.*|AP_.*|BP_.*|BMAJ|BMIN|BPA)$/;
  const kept = header.filter((c) => !drop.test(c.keyword));
  const [m11, m12, m21, m22] = reference.matrix;
  const ctype = (c: HeaderCard): HeaderCard =>
    /^CTYPE[12]$/.test(c.keyword) && typeof c.value === 'string'
      ? { ...c, value: c.value.replace(/-SIP$/, '') }
      : c;
  return [
    ...kept.map(ctype),
    { keyword: 'CRPIX1', value: f * (reference.referencePixel[0] - 0.5) + 0.5, real: true },
    { keyword: 'CRPIX2', value: f * (reference.referencePixel[1] - 0.5) + 0.5, real: true },
    { keyword: 'CD1_1', value: m11 / f, real: true },
    { keyword: 'CD1_2', value: m12 / f, real: true },
    { keyword: 'CD2_1', value: m21 / f, real: true },
    { keyword: 'CD2_2', value: m22 / f, real: true },
  ];
}

/** True when the written common-grid header leaves out the reference's SIP distortion. */
export function commonGridDropsSip(grid: CommonGrid, header: readonly HeaderCard[]): boolean {
  return grid.factor !== 1 && header.some((c) => c.keyword === 'A_ORDER');
}

const D2R = Math.PI / 180;
/** ICRS → galactic rotation (Hipparcos, ESA 1997, vol. 1, eq. 1.5.11): r_gal = A·r_icrs. */
const ICRS_TO_GALACTIC = [
  [-0.0548755604162154, -0.873437090234885, -0.4838350155487132],
  [0.4941094278755837, -0.4448296299600112, 0.746982244497219],
  [-0.867666149019005, -0.1980763734312015, 0.4559837761750669],
] as const;

function rotate(matrix: readonly (readonly number[])[], transpose: boolean, lon: number, lat: number) {
  const cl = Math.cos(lat * D2R);
  const v = [cl * Math.cos(lon * D2R), cl * Math.sin(lon * D2R), Math.sin(lat * D2R)];
  const out = [0, 0, 0];
  for (let i = 0; i < 3; i++)
    for (let j = 0; j < 3; j++) out[i]! += (transpose ? matrix[j]![i]! : matrix[i]![j]!) * v[j]!;
  const l = Math.atan2(out[1]!, out[0]!) / D2R;
  const b = Math.atan2(out[2]!, Math.hypot(out[0]!, out[1]!)) / D2R;
  return [(l + 360) % 360, b] as [number, number];
}

type FrameKey = 'equatorial-j2000' | 'galactic' | string;

function frameKey(frame: WcsFrame | null, equinox: number | null): FrameKey {
  if (frame === 'ICRS') return 'equatorial-j2000';
  if (frame === 'FK5' && (equinox === null || Math.abs(equinox - 2000) < 1e-6)) return 'equatorial-j2000';
  if (frame === 'galactic') return 'galactic';
  return `${frame ?? 'unknown'}${equinox !== null ? ` (equinox ${equinox})` : ''}`;
}

/** World (lon, lat) in frame `from` → frame `to`; throws when no supported conversion exists. */
export function frameConversion(
  from: { frame: WcsFrame | null; equinox: number | null },
  to: { frame: WcsFrame | null; equinox: number | null },
  names: [string, string],
): (lon: number, lat: number) => [number, number] {
  const a = frameKey(from.frame, from.equinox);
  const b = frameKey(to.frame, to.equinox);
  if (a === b) return (lon, lat) => [lon, lat];
  if (a === 'equatorial-j2000' && b === 'galactic')
    return (lon, lat) => rotate(ICRS_TO_GALACTIC, false, lon, lat);
  if (a === 'galactic' && b === 'equatorial-j2000')
    return (lon, lat) => rotate(ICRS_TO_GALACTIC, true, lon, lat);
  throw new Error(
    `${names[1]} is in the ${b} frame and ${names[0]} in ${a}: no conversion between these frames is supported (ICRS, FK5 J2000 and galactic are); reproject one image first`,
  );
}

/** Common pixel (0-based) → image pixel (0-based), through world coordinates. */
export function commonToImageMap(grid: CommonGrid, wcs: Wcs, names: [string, string]): PixelMap {
  const convert = frameConversion(grid, wcs, names);
  return (x, y) => {
    const [lon, lat] = grid.pixelToWorld(x + 1, y + 1);
    if (!Number.isFinite(lon) || !Number.isFinite(lat)) return [NaN, NaN];
    const [l2, b2] = convert(lon, lat);
    const [px, py] = wcs.worldToPixel(l2, b2);
    return [px - 1, py - 1];
  };
}

/** Image pixel (0-based) → common pixel (0-based). */
export function imageToCommonMap(grid: CommonGrid, wcs: Wcs, names: [string, string]): PixelMap {
  const convert = frameConversion(wcs, grid, [names[1], names[0]]);
  return (x, y) => {
    const [lon, lat] = wcs.pixelToWorld(x + 1, y + 1);
    if (!Number.isFinite(lon) || !Number.isFinite(lat)) return [NaN, NaN];
    const [l2, b2] = convert(lon, lat);
    const [px, py] = grid.worldToPixel(l2, b2);
    return [px - 1, py - 1];
  };
}
