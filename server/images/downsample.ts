/**
 * Block-mean downsampling of an image plane for views and thumbnails: the smallest integer factor f with
 * ceil(width / f) and ceil(height / f) both ≤ maxSize; each output pixel is the mean of the valid input pixels of
 * its f × f block (clipped at the right and top edges), or NaN when all of them are blank. Row order is kept
 * (row 0 = the bottom row). Usable for any float plane (images, run components).
 */
import type { PixelView } from '../../shared/images';

export function blockFactor(width: number, height: number, maxSize: number): number {
  if (!(maxSize >= 1)) throw new RangeError(`maxSize must be at least 1, got ${maxSize}`);
  return Math.max(1, Math.ceil(Math.max(width, height) / maxSize));
}

/**
 * @param data row-major width × height
 * @param mask optional, 1 = valid; without it every finite value is valid
 */
export function downsampleMean(
  data: ArrayLike<number>,
  mask: Uint8Array | null,
  width: number,
  height: number,
  maxSize: number,
): PixelView {
  if (data.length !== width * height) {
    throw new RangeError(`data has ${data.length} values, expected ${width}×${height} = ${width * height}`);
  }
  const factor = blockFactor(width, height, maxSize);
  const outWidth = Math.ceil(width / factor);
  const outHeight = Math.ceil(height / factor);
  const sums = new Float64Array(outWidth * outHeight);
  const counts = new Uint32Array(outWidth * outHeight);
  for (let y = 0; y < height; y++) {
    const outRow = Math.floor(y / factor) * outWidth;
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const v = data[i]!;
      if ((mask && mask[i] !== 1) || !Number.isFinite(v)) continue;
      const o = outRow + Math.floor(x / factor);
      sums[o]! += v;
      counts[o]!++;
    }
  }
  const out = new Float32Array(outWidth * outHeight);
  let blankPixels = 0;
  for (let o = 0; o < out.length; o++) {
    const count = counts[o]!;
    if (count === 0) {
      out[o] = NaN;
      blankPixels++;
    } else out[o] = sums[o]! / count;
  }
  return {
    width: outWidth,
    height: outHeight,
    factor,
    sourceWidth: width,
    sourceHeight: height,
    blankPixels,
    data: out,
  };
}
