/**
 * Quick-look inputs without WCS: TIFF (through geotiff: integer and float samples) and PNG/JPEG (through jimp,
 * 8 bits; 16-bit PNG through png-16bit.ts because jimp rescales it to 8 bits).
 *
 * Colour images become one luma plane Y' = w_R R' + w_G G' + w_B B' of the stored (gamma-encoded) values:
 * - PNG and TIFF use the ITU-R BT.709-6 weights (item 3.2: 0.2126, 0.7152, 0.0722), the primaries of sRGB;
 * - JPEG uses the BT.601 weights (0.299, 0.587, 0.114), those of the JFIF YCbCr transform (ITU-T T.871 §7).
 * Greyscale images keep their values. Alpha is ignored except that fully transparent pixels are masked.
 * Rows are flipped so that row 0 is the bottom row, as for FITS (y = 1 at the bottom).
 * The pixel count is checked from the file header before any decoding.
 */
import { fromArrayBuffer } from 'geotiff';
import { Jimp } from 'jimp';
import { decodePng16, readPngHeader } from './png-16bit';
import { checkContent, checkDimensions, ImageReadError, type ImageFormat, type SkyImage } from './sky-image';

export const REC709 = [0.2126, 0.7152, 0.0722] as const;
export const REC601 = [0.299, 0.587, 0.114] as const;

function rasterImage(
  format: ImageFormat,
  width: number,
  height: number,
  data: Float32Array,
  mask: Uint8Array,
): SkyImage {
  checkContent(data, mask);
  return {
    width,
    height,
    data,
    mask,
    header: [],
    wcs: null,
    beam: null,
    unit: null,
    format,
    plane: null,
    originalAxes: [width, height],
    warnings: [],
  };
}

/**
 * Fills data/mask from interleaved samples stored top row first, flipping to bottom-first.
 * `channels` 1–2 are grey (+alpha), 3–4 colour (+alpha); `weights` turn colour into luma.
 */
function toPlane(
  width: number,
  height: number,
  channels: number,
  sample: (index: number) => number,
  weights: readonly [number, number, number],
  alphaMax: number,
): { data: Float32Array; mask: Uint8Array } {
  const data = new Float32Array(width * height);
  const mask = new Uint8Array(width * height);
  const hasAlpha = channels === 2 || channels === 4;
  for (let row = 0; row < height; row++) {
    const outRow = height - 1 - row;
    for (let x = 0; x < width; x++) {
      const base = (row * width + x) * channels;
      const value =
        channels >= 3
          ? weights[0] * sample(base) + weights[1] * sample(base + 1) + weights[2] * sample(base + 2)
          : sample(base);
      const transparent = hasAlpha && alphaMax > 0 && sample(base + channels - 1) === 0;
      const i = outRow * width + x;
      if (Number.isFinite(value) && !transparent) {
        data[i] = value;
        mask[i] = 1;
      }
    }
  }
  return { data, mask };
}

/** TIFF: first image; single-band integer or float samples, or RGB(A) as luma (BT.709). */
export async function readTiff(bytes: Uint8Array, maxPixels: number): Promise<SkyImage> {
  let image;
  try {
    const buffer = bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer;
    const tiff = await fromArrayBuffer(buffer);
    image = await tiff.getImage();
  } catch (error) {
    throw new ImageReadError('bad-raster', `The TIFF file cannot be read (${(error as Error).message})`);
  }
  const width = image.getWidth();
  const height = image.getHeight();
  checkDimensions(width, height, maxPixels);
  const channels = image.getSamplesPerPixel();
  if (channels > 4) {
    throw new ImageReadError(
      'bad-raster',
      `The TIFF image has ${channels} samples per pixel; 1 to 4 are supported`,
    );
  }
  let raster: ArrayLike<number>;
  try {
    raster = (await image.readRasters({ interleave: true })) as unknown as ArrayLike<number>;
  } catch (error) {
    throw new ImageReadError(
      'bad-raster',
      `The TIFF pixel data cannot be decoded (${(error as Error).message})`,
    );
  }
  if (raster.length < width * height * channels) {
    throw new ImageReadError('truncated', `The TIFF pixel data are truncated`);
  }
  const { data, mask } = toPlane(width, height, channels, (i) => raster[i] as number, REC709, 1);
  return rasterImage('tiff', width, height, data, mask);
}

/** Width and height from a JPEG's start-of-frame marker (ITU-T T.81, B.2.2), or null if not found. */
export function readJpegSize(bytes: Uint8Array): { width: number; height: number } | null {
  let at = 2;
  while (at + 9 < bytes.length) {
    if (bytes[at] !== 0xff) return null;
    const marker = bytes[at + 1] ?? 0;
    if (marker === 0xff) {
      at++;
      continue;
    }
    const length = ((bytes[at + 2] ?? 0) << 8) | (bytes[at + 3] ?? 0);
    // SOF0–SOF15 except DHT (C4), JPG (C8) and DAC (CC).
    if (marker >= 0xc0 && marker <= 0xcf && marker !== 0xc4 && marker !== 0xc8 && marker !== 0xcc) {
      const height = ((bytes[at + 5] ?? 0) << 8) | (bytes[at + 6] ?? 0);
      const width = ((bytes[at + 7] ?? 0) << 8) | (bytes[at + 8] ?? 0);
      return { width, height };
    }
    at += 2 + length;
  }
  return null;
}

/** PNG (8 or 16 bits) or JPEG as one luma plane. */
export async function readPngOrJpeg(
  bytes: Uint8Array,
  format: 'png' | 'jpeg',
  maxPixels: number,
): Promise<SkyImage> {
  const size = format === 'png' ? readPngHeader(bytes) : readJpegSize(bytes);
  if (!size) throw new ImageReadError('bad-raster', `The ${format.toUpperCase()} header cannot be read`);
  checkDimensions(size.width, size.height, maxPixels);
  const png = format === 'png' ? readPngHeader(bytes) : null;
  if (png && png.bitDepth === 16) {
    const decoded = decodePng16(bytes);
    const { data, mask } = toPlane(
      decoded.width,
      decoded.height,
      decoded.channels,
      (i) => decoded.samples[i] as number,
      REC709,
      65535,
    );
    return rasterImage('png', decoded.width, decoded.height, data, mask);
  }
  let bitmap: { width: number; height: number; data: Uint8Array };
  try {
    bitmap = (await Jimp.read(Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength))).bitmap;
  } catch (error) {
    throw new ImageReadError(
      'bad-raster',
      `The ${format.toUpperCase()} image cannot be decoded (${(error as Error).message})`,
    );
  }
  // jimp always gives 8-bit RGBA; a grey source has R = G = B, so the luma equals the grey value.
  const weights = format === 'jpeg' ? REC601 : REC709;
  const hasAlpha =
    format === 'png' &&
    png !== null &&
    (png.colourType === 4 || png.colourType === 6 || png.colourType === 3);
  const { data, mask } = toPlane(
    bitmap.width,
    bitmap.height,
    4,
    (i) => bitmap.data[i] as number,
    weights,
    hasAlpha ? 255 : 0,
  );
  return rasterImage(format, bitmap.width, bitmap.height, data, mask);
}
