/**
 * The image every reader returns, the reader's error type, and the checks that every input must pass
 * whatever its format (size, blank, constant).
 */
import type { Wcs } from '../wcs/wcs';
import type { HeaderCard } from './header-card';

export type ImageFormat = 'fits' | 'tiff' | 'png' | 'jpeg';

/** Restoring beam from BMAJ/BMIN/BPA (degrees; position angle east of north). */
export interface Beam {
  majorDeg: number;
  minorDeg: number;
  paDeg: number;
}

export interface SkyImage {
  width: number;
  height: number;
  /** Row-major, x fastest; row 0 is FITS y = 1 (the bottom row as usually displayed). Masked pixels hold 0. */
  data: Float32Array;
  /** 1 = valid, 0 = blank (BLANK, NaN or ±Infinity in the file). */
  mask: Uint8Array;
  /** Header cards of the HDU read (CONTINUE strings joined); [] for TIFF/PNG/JPEG. */
  header: HeaderCard[];
  /** Celestial or linear WCS of axes 1 and 2; null when the header has none usable (always for TIFF/PNG/JPEG). */
  wcs: Wcs | null;
  beam: Beam | null;
  /** BUNIT, trimmed; null when absent. */
  unit: string | null;
  format: ImageFormat;
  /** 1-based plane read from a cube; null when the image has a single plane. */
  plane: number | null;
  /** NAXIS1, NAXIS2, … as in the file (width, height for other formats). */
  originalAxes: number[];
  /** Things the reader noticed but could work around (e.g. an unsupported WCS projection). */
  warnings: string[];
}

/** Machine-readable reasons for refusing an image; each comes with a human message. */
export type ImageReadErrorCode =
  | 'empty-file'
  | 'unknown-format'
  | 'not-fits'
  | 'header-without-end'
  | 'bad-header'
  | 'unsupported-bitpix'
  | 'no-image'
  | 'not-an-image'
  | 'truncated'
  | 'too-many-pixels'
  | 'too-small'
  | 'cube-needs-plane'
  | 'bad-plane'
  | 'all-blank'
  | 'constant'
  | 'bad-gzip'
  | 'inflate-limit'
  | 'needs-async'
  | 'bad-raster';

export class ImageReadError extends Error {
  readonly code: ImageReadErrorCode;
  constructor(code: ImageReadErrorCode, message: string) {
    super(message);
    this.name = 'ImageReadError';
    this.code = code;
  }
}

/** Smallest accepted width and height (pixels). */
export const MIN_SIDE = 16;

export interface ReadLimits {
  /** Largest accepted number of pixels in the plane read. @default 64e6 */
  maxPixels: number;
  /** Largest accepted size of inflated gzip data, bytes. @default 2 GiB */
  maxInflatedBytes: number;
}

export const DEFAULT_LIMITS: ReadLimits = { maxPixels: 64e6, maxInflatedBytes: 2 * 1024 ** 3 };

/** Refuses an image that is too small or too large; call before allocating its pixels. */
export function checkDimensions(width: number, height: number, maxPixels: number): void {
  const pixels = width * height;
  if (pixels > maxPixels) {
    throw new ImageReadError(
      'too-many-pixels',
      `The image has ${width}×${height} = ${pixels} pixels, more than the limit of ${maxPixels}`,
    );
  }
  if (width < MIN_SIDE || height < MIN_SIDE) {
    throw new ImageReadError(
      'too-small',
      `The image is ${width}×${height} pixels, smaller than the minimum of ${MIN_SIDE}×${MIN_SIDE}`,
    );
  }
}

/** Refuses an image with no valid pixel or with all valid pixels equal (nothing to separate). */
export function checkContent(data: Float32Array, mask: Uint8Array): void {
  let first = NaN;
  let valid = 0;
  let varies = false;
  for (let i = 0; i < data.length; i++) {
    if (mask[i] !== 1) continue;
    const v = data[i] as number;
    if (valid === 0) first = v;
    else if (v !== first) varies = true;
    valid++;
  }
  if (valid === 0) throw new ImageReadError('all-blank', 'Every pixel of the image is blank (BLANK or NaN)');
  if (!varies)
    throw new ImageReadError('constant', `The image is constant: every valid pixel equals ${first}`);
}

/** Formats a byte count for messages, e.g. "2 GiB" or "1.5 MiB". */
export function formatBytes(bytes: number): string {
  const units = ['bytes', 'KiB', 'MiB', 'GiB', 'TiB'];
  let value = bytes;
  let unit = 0;
  while (value >= 1024 && unit < units.length - 1) {
    value /= 1024;
    unit++;
  }
  return unit === 0 ? `${bytes} bytes` : `${Number(value.toPrecision(3))} ${units[unit]}`;
}
