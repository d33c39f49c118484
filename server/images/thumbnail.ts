/**
 * Thumbnail of an image: block-mean downsampled to at most 256 pixels on the longer side, asinh-stretched
 * between the 0.5 and 99.5 percentiles of the valid view pixels, written as an 8-bit grey + alpha PNG
 * (blank pixels transparent), north-up as usually displayed (PNG row 0 = the top row = the last image row).
 *
 * Stretch: t = clip((v − lo) / (hi − lo), 0, 1), grey = 255 · asinh(t / β) / asinh(1 / β) with β = 0.1
 * (the asinh stretch of Lupton et al. 1999, AJ 118, 1406, in its simplest one-band form; β chosen by eye,
 * common practice). PNG layout: ISO/IEC 15948 (PNG, 2nd edition): signature, IHDR, one zlib IDAT, IEND; each
 * scanline starts with filter type 0 (none); chunk CRCs are CRC-32 over type and data.
 */
import { crc32, deflateSync } from 'node:zlib';

import { downsampleMean } from './downsample';

export const THUMBNAIL_MAX_SIZE = 256;
const SOFTENING = 0.1;

function percentile(sorted: Float32Array, q: number): number {
  const position = q * (sorted.length - 1);
  const lower = Math.floor(position);
  const upper = Math.min(lower + 1, sorted.length - 1);
  return sorted[lower]! + (sorted[upper]! - sorted[lower]!) * (position - lower);
}

/** The grey levels (0–255, NaN → −1 for blank) of the stretched view, PNG row order (top first). */
export function stretchAsinh(data: Float32Array, width: number, height: number): Int16Array {
  const finite = Float32Array.from(data.filter((v) => Number.isFinite(v))).sort();
  const out = new Int16Array(width * height).fill(-1);
  if (finite.length === 0) return out;
  const lo = percentile(finite, 0.005);
  const hi = percentile(finite, 0.995);
  const range = hi > lo ? hi - lo : 1;
  const norm = Math.asinh(1 / SOFTENING);
  for (let y = 0; y < height; y++) {
    const source = (height - 1 - y) * width;
    for (let x = 0; x < width; x++) {
      const v = data[source + x]!;
      if (!Number.isFinite(v)) continue;
      const t = Math.min(Math.max((v - lo) / range, 0), 1);
      out[y * width + x] = Math.round((255 * Math.asinh(t / SOFTENING)) / norm);
    }
  }
  return out;
}

function chunk(type: string, data: Uint8Array): Buffer {
  const out = Buffer.alloc(12 + data.length);
  out.writeUInt32BE(data.length, 0);
  out.write(type, 4, 'latin1');
  out.set(data, 8);
  out.writeUInt32BE(crc32(out.subarray(4, 8 + data.length)), 8 + data.length);
  return out;
}

/** An 8-bit grey + alpha PNG of grey levels (−1 = transparent), rows top first. */
export function encodeGreyAlphaPng(levels: Int16Array, width: number, height: number): Buffer {
  const header = Buffer.alloc(13);
  header.writeUInt32BE(width, 0);
  header.writeUInt32BE(height, 4);
  header[8] = 8; // bit depth
  header[9] = 4; // colour type 4: greyscale with alpha
  // compression 0, filter 0, interlace 0
  const raw = Buffer.alloc(height * (1 + 2 * width));
  for (let y = 0; y < height; y++) {
    const row = y * (1 + 2 * width);
    raw[row] = 0;
    for (let x = 0; x < width; x++) {
      const level = levels[y * width + x]!;
      raw[row + 1 + 2 * x] = level < 0 ? 0 : level;
      raw[row + 2 + 2 * x] = level < 0 ? 0 : 255;
    }
  }
  const signature = Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
  return Buffer.concat([
    signature,
    chunk('IHDR', header),
    chunk('IDAT', deflateSync(raw)),
    chunk('IEND', new Uint8Array(0)),
  ]);
}

export function thumbnailPng(data: Float32Array, mask: Uint8Array, width: number, height: number): Buffer {
  const view = downsampleMean(data, mask, width, height, THUMBNAIL_MAX_SIZE);
  return encodeGreyAlphaPng(stretchAsinh(view.data, view.width, view.height), view.width, view.height);
}
