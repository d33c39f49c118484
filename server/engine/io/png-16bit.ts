/**
 * Decoder for 16-bit-per-sample PNG images (greyscale, greyscale + alpha, RGB, RGBA), which the general image
 * library rescales to 8 bits. After the PNG specification (W3C Recommendation, 2nd ed. 2003 / ISO 15948):
 * - signature, then chunks (length, type, data, CRC) (sections 5.2–5.3); IHDR first (11.2.2);
 *   the concatenated IDAT data is one zlib stream (10.1);
 * - each scanline begins with a filter-type byte: None, Sub, Up, Average, Paeth (section 9.2), reconstructed
 *   bytewise with bpp = bytes per complete pixel; Paeth predictor as in section 9.4;
 * - samples are big-endian (7.1).
 * Interlaced (Adam7) 16-bit files are refused. The inflated size is capped at the exact size the header implies.
 */
import { inflateSync } from 'node:zlib';
import { ImageReadError } from './sky-image';

export interface Png16 {
  width: number;
  height: number;
  /** Samples per pixel: 1 grey, 2 grey+alpha, 3 RGB, 4 RGBA. */
  channels: number;
  /** Row-major samples, top row first (as stored), channel fastest. */
  samples: Uint16Array;
}

const SIGNATURE = [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a];

export interface PngHeader {
  width: number;
  height: number;
  bitDepth: number;
  colourType: number;
  interlace: number;
}

/** Reads the IHDR chunk (no pixel data touched), or null when the bytes are not a PNG. */
export function readPngHeader(bytes: Uint8Array): PngHeader | null {
  if (bytes.length < 33 || SIGNATURE.some((b, i) => bytes[i] !== b)) return null;
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  if (String.fromCharCode(...bytes.subarray(12, 16)) !== 'IHDR') return null;
  return {
    width: view.getUint32(16),
    height: view.getUint32(20),
    bitDepth: bytes[24] ?? 0,
    colourType: bytes[25] ?? 0,
    interlace: bytes[28] ?? 0,
  };
}

const CHANNELS: Record<number, number> = { 0: 1, 2: 3, 4: 2, 6: 4 };

/** Decodes a 16-bit PNG whose header has already passed the pixel-count check. */
export function decodePng16(bytes: Uint8Array): Png16 {
  const header = readPngHeader(bytes);
  if (!header || header.bitDepth !== 16) throw new ImageReadError('bad-raster', 'Not a 16-bit PNG image');
  const channels = CHANNELS[header.colourType];
  if (channels === undefined) {
    throw new ImageReadError('bad-raster', `PNG colour type ${header.colourType} cannot have 16-bit samples`);
  }
  if (header.interlace !== 0) {
    throw new ImageReadError(
      'bad-raster',
      'Interlaced 16-bit PNG images are not supported; save without interlacing',
    );
  }
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const idat: Uint8Array[] = [];
  for (let at = 8; at + 12 <= bytes.length;) {
    const length = view.getUint32(at);
    const type = String.fromCharCode(...bytes.subarray(at + 4, at + 8));
    if (at + 12 + length > bytes.length) throw new ImageReadError('truncated', 'The PNG file is truncated');
    if (type === 'IDAT') idat.push(bytes.subarray(at + 8, at + 8 + length));
    if (type === 'IEND') break;
    at += 12 + length;
  }
  const { width, height } = header;
  const bpp = channels * 2;
  const stride = width * bpp;
  const expected = height * (stride + 1);
  let raw: Uint8Array;
  try {
    raw = inflateSync(Buffer.concat(idat), { maxOutputLength: expected });
  } catch (error) {
    throw new ImageReadError('bad-raster', `The PNG image data are corrupt (${(error as Error).message})`);
  }
  if (raw.length < expected) {
    throw new ImageReadError(
      'truncated',
      `The PNG image data are truncated: expected ${expected} bytes, got ${raw.length}`,
    );
  }
  const pixels = new Uint8Array(height * stride);
  for (let y = 0; y < height; y++) {
    const filter = raw[y * (stride + 1)];
    const line = raw.subarray(y * (stride + 1) + 1, (y + 1) * (stride + 1));
    const out = pixels.subarray(y * stride, (y + 1) * stride);
    const prior = y > 0 ? pixels.subarray((y - 1) * stride, y * stride) : null;
    unfilter(filter ?? 255, line, out, prior, bpp);
  }
  const samples = new Uint16Array(width * height * channels);
  for (let i = 0; i < samples.length; i++)
    samples[i] = ((pixels[2 * i] ?? 0) << 8) | (pixels[2 * i + 1] ?? 0);
  return { width, height, channels, samples };
}

/** Reverses one scanline's filter (PNG spec section 9.2); `prior` is the previous reconstructed line or null. */
function unfilter(
  filter: number,
  line: Uint8Array,
  out: Uint8Array,
  prior: Uint8Array | null,
  bpp: number,
): void {
  for (let i = 0; i < line.length; i++) {
    const x = line[i] ?? 0;
    const a = i >= bpp ? (out[i - bpp] ?? 0) : 0;
    const b = prior ? (prior[i] ?? 0) : 0;
    const c = prior && i >= bpp ? (prior[i - bpp] ?? 0) : 0;
    let value: number;
    switch (filter) {
      case 0:
        value = x;
        break;
      case 1:
        value = x + a;
        break;
      case 2:
        value = x + b;
        break;
      case 3:
        value = x + ((a + b) >> 1);
        break;
      case 4: {
        // Paeth predictor (section 9.4).
        const p = a + b - c;
        const pa = Math.abs(p - a);
        const pb = Math.abs(p - b);
        const pc = Math.abs(p - c);
        value = x + (pa <= pb && pa <= pc ? a : pb <= pc ? b : c);
        break;
      }
      default:
        throw new ImageReadError('bad-raster', `The PNG image uses an unknown scanline filter (${filter})`);
    }
    out[i] = value & 0xff;
  }
}
