/**
 * The single entry for reading an uploaded image: sniffs the format from its first bytes
 * (FITS "SIMPLE  =", gzip 1F 8B, TIFF "II*\0"/"MM\0*", PNG signature, JPEG FF D8 FF), inflates gzip with a cap,
 * and returns a SkyImage or throws an ImageReadError with a message for a person.
 *
 * - `readImage` is synchronous and reads FITS (also gzip-compressed FITS). TIFF, PNG and JPEG decoders are
 *   asynchronous; `readImage` refuses them with code 'needs-async'.
 * - `readImageAsync` reads every format and is the general entry for the service and the command line.
 *
 * Gzip: the whole input is inflated with zlib's maxOutputLength, so a small stream that would inflate to many
 * gigabytes stops at the cap with an error instead of filling memory. Concatenated gzip members are joined.
 */
import { gunzipSync } from 'node:zlib';
import { looksLikeFits, readFits } from './fits-reader';
import { readPngOrJpeg, readTiff } from './raster-input';
import { DEFAULT_LIMITS, formatBytes, ImageReadError, type ImageFormat, type SkyImage } from './sky-image';

export interface ReadImageOptions {
  /** Original file name, used only to word messages (e.g. a '.fits' file that is not FITS). */
  fileName?: string;
  /** 1-based plane of a FITS cube. @default none (a cube without it is refused with a message naming the range) */
  plane?: number;
  /** Largest accepted number of pixels in the image read, checked before allocating. @default 64e6 */
  maxPixels?: number;
  /** Largest accepted size of inflated gzip data, bytes. @default 2 GiB */
  maxInflatedBytes?: number;
}

type Sniffed = ImageFormat | 'gzip' | 'unknown';

/** Recognises the container from its magic bytes. */
export function sniffFormat(bytes: Uint8Array): Sniffed {
  const b = (i: number): number => bytes[i] ?? -1;
  if (b(0) === 0x1f && b(1) === 0x8b) return 'gzip';
  if (looksLikeFits(bytes)) return 'fits';
  if (
    (b(0) === 0x49 && b(1) === 0x49 && b(2) === 0x2a && b(3) === 0) ||
    (b(0) === 0x4d && b(1) === 0x4d && b(2) === 0 && b(3) === 0x2a)
  ) {
    return 'tiff';
  }
  if (b(0) === 0x89 && b(1) === 0x50 && b(2) === 0x4e && b(3) === 0x47) return 'png';
  if (b(0) === 0xff && b(1) === 0xd8 && b(2) === 0xff) return 'jpeg';
  return 'unknown';
}

function checkOptions(options: ReadImageOptions): Required<Omit<ReadImageOptions, 'fileName' | 'plane'>> {
  const maxPixels = options.maxPixels ?? DEFAULT_LIMITS.maxPixels;
  const maxInflatedBytes = options.maxInflatedBytes ?? DEFAULT_LIMITS.maxInflatedBytes;
  if (!(maxPixels > 0)) throw new RangeError(`maxPixels must be positive, got ${maxPixels}`);
  if (!(maxInflatedBytes > 0))
    throw new RangeError(`maxInflatedBytes must be positive, got ${maxInflatedBytes}`);
  return { maxPixels, maxInflatedBytes };
}

/** Inflates gzip data, refusing output beyond `limit` bytes. */
export function gunzipCapped(bytes: Uint8Array, limit: number): Uint8Array {
  try {
    return gunzipSync(bytes, { maxOutputLength: limit });
  } catch (error) {
    const e = error as NodeJS.ErrnoException;
    if (e.code === 'ERR_BUFFER_TOO_LARGE' || e instanceof RangeError) {
      throw new ImageReadError(
        'inflate-limit',
        `The gzip data inflate beyond the limit of ${formatBytes(limit)}; the file was refused`,
      );
    }
    throw new ImageReadError('bad-gzip', `The gzip data are corrupt or incomplete (${e.message})`);
  }
}

/** Unwraps gzip (once) and tells the format of what is inside; refuses empty and unknown data. */
function unwrap(
  bytes: Uint8Array,
  options: ReadImageOptions,
  limit: number,
): { bytes: Uint8Array; format: ImageFormat } {
  if (bytes.length === 0) throw new ImageReadError('empty-file', 'The file is empty');
  let inner = bytes;
  let format = sniffFormat(bytes);
  if (format === 'gzip') {
    inner = gunzipCapped(bytes, limit);
    if (inner.length === 0) throw new ImageReadError('empty-file', 'The gzip data inflate to an empty file');
    format = sniffFormat(inner);
    if (format === 'gzip') {
      throw new ImageReadError(
        'unknown-format',
        'The gzip data hold another gzip stream; unpack it once and try again',
      );
    }
  }
  if (format === 'unknown') {
    const name = options.fileName?.toLowerCase() ?? '';
    if (/\.(fits?|fts)(\.gz)?$/.test(name) || String.fromCharCode(...inner.subarray(0, 6)) === 'SIMPLE') {
      throw new ImageReadError('not-fits', 'This is not a FITS file: it does not begin with SIMPLE = T');
    }
    throw new ImageReadError(
      'unknown-format',
      'The file is not a FITS, TIFF, PNG or JPEG image (its first bytes match none)',
    );
  }
  return { bytes: inner, format };
}

/** Reads a FITS image (plain or gzip-compressed) synchronously; see the file comment. */
export function readImage(bytes: Uint8Array, options: ReadImageOptions = {}): SkyImage {
  const { maxPixels, maxInflatedBytes } = checkOptions(options);
  const input = unwrap(bytes, options, maxInflatedBytes);
  if (input.format !== 'fits') {
    throw new ImageReadError(
      'needs-async',
      `${input.format.toUpperCase()} images are decoded asynchronously: call readImageAsync`,
    );
  }
  return readFits(input.bytes, { plane: options.plane, maxPixels });
}

/** Reads FITS, TIFF, PNG or JPEG (each possibly gzip-compressed). */
export async function readImageAsync(bytes: Uint8Array, options: ReadImageOptions = {}): Promise<SkyImage> {
  const { maxPixels, maxInflatedBytes } = checkOptions(options);
  const input = unwrap(bytes, options, maxInflatedBytes);
  switch (input.format) {
    case 'fits':
      return readFits(input.bytes, { plane: options.plane, maxPixels });
    case 'tiff':
      return readTiff(input.bytes, maxPixels);
    case 'png':
    case 'jpeg':
      return readPngOrJpeg(input.bytes, input.format, maxPixels);
  }
}

export { ImageReadError } from './sky-image';
export type { SkyImage, Beam, ImageFormat, ImageReadErrorCode } from './sky-image';
