/**
 * A PSF from a user-supplied image (row-major, width × height), validated, centred and normalised.
 *
 * - Every value must be finite; the peak and the sum must be positive.
 * - The centre is the light centroid of the positive values, rounded to the nearest pixel; odd and even sizes are
 *   both fine because the centre is stored as a pixel index rather than assumed to be the middle of the array.
 * - If the centroid lies more than a quarter of the array's width or height from its middle, or the peak sits on
 *   the border, the wings would be cut off on one side: the image is refused rather than silently shifted.
 * - The result is scaled to unit sum (flux conservation of the convolution).
 * The values are taken to be pixel-integrated already (an observed or rendered PSF), so stamps made from it are not
 * integrated again.
 */
import type { ImagePsf } from './psf';

export const PSF_IMAGE_MAX_SIDE = 1024;

export function psfFromImage(data: ArrayLike<number>, width: number, height: number): ImagePsf {
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 3 || height < 3) {
    throw new Error(
      `PSF image must be at least 3 × 3 pixels with whole-number sides (got ${width} × ${height})`,
    );
  }
  if (width > PSF_IMAGE_MAX_SIDE || height > PSF_IMAGE_MAX_SIDE) {
    throw new Error(
      `PSF image is ${width} × ${height} pixels; at most ${PSF_IMAGE_MAX_SIDE} per side is accepted (crop it around the peak)`,
    );
  }
  if (data.length !== width * height) {
    throw new Error(
      `PSF image has ${data.length} values but ${width} × ${height} = ${width * height} were expected`,
    );
  }
  let bad = 0;
  let peak = -Infinity;
  let peakIndex = 0;
  let sum = 0;
  let sumPositive = 0;
  let sx = 0;
  let sy = 0;
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const v = data[i] as number;
      if (!Number.isFinite(v)) {
        bad++;
        continue;
      }
      sum += v;
      if (v > peak) {
        peak = v;
        peakIndex = i;
      }
      if (v > 0) {
        sumPositive += v;
        sx += v * x;
        sy += v * y;
      }
    }
  }
  if (bad > 0)
    throw new Error(`PSF image has ${bad} blank or non-finite pixel(s); a PSF must be fully defined`);
  if (!(peak > 0)) throw new Error('PSF image has no positive pixel: its peak must be positive');
  if (!(sum > 0)) throw new Error(`PSF image sums to ${sum}; a PSF must have a positive total`);
  const peakX = peakIndex % width;
  const peakY = Math.floor(peakIndex / width);
  if (peakX === 0 || peakY === 0 || peakX === width - 1 || peakY === height - 1) {
    throw new Error(
      `PSF image peaks on its border (pixel ${peakX + 1}, ${peakY + 1}); centre the PSF in the image`,
    );
  }
  const cx = sx / sumPositive;
  const cy = sy / sumPositive;
  const offX = cx - (width - 1) / 2;
  const offY = cy - (height - 1) / 2;
  if (Math.abs(offX) > width / 4 || Math.abs(offY) > height / 4) {
    throw new Error(
      `PSF image is far off-centre: its centroid is ${offX.toFixed(1)}, ${offY.toFixed(1)} pixels from the middle ` +
        `(more than a quarter of the ${width} × ${height} image); centre the PSF in the image`,
    );
  }
  const out = new Float64Array(width * height);
  for (let i = 0; i < out.length; i++) out[i] = (data[i] as number) / sum;
  return { kind: 'image', width, height, data: out, centreX: Math.round(cx), centreY: Math.round(cy) };
}
