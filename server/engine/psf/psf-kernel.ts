/**
 * The PSF as a convolution kernel on a periodic width × height grid, centred on pixel (0, 0) with wrap-around:
 * offset (i, j) sits at ((i mod width), (j mod height)). Light that would fall beyond a grid smaller than the PSF
 * is folded back (the periodic sum), so the kernel always sums to one and convolution conserves flux.
 * Gaussian PSFs are pixel-integrated (see psf-stamp.ts); image PSFs are used as given (already pixel-integrated).
 */
import type { Psf } from './psf';
import { psfStamp, psfStampHalfSize } from './psf-stamp';

export function psfKernelOnGrid(psf: Psf, width: number, height: number): Float64Array;
/** The same into `out` (width·height entries, overwritten): e.g. a float32 scratch grid. */
export function psfKernelOnGrid<T extends Float32Array | Float64Array>(
  psf: Psf,
  width: number,
  height: number,
  out: T,
): T;
export function psfKernelOnGrid(
  psf: Psf,
  width: number,
  height: number,
  out?: Float32Array | Float64Array,
): Float32Array | Float64Array {
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 1 || height < 1) {
    throw new Error(`PSF kernel grid must have whole-number positive sides (got ${width} × ${height})`);
  }
  if (out && out.length !== width * height) {
    throw new Error(`PSF kernel grid: ${out.length} entries given for ${width} × ${height}`);
  }
  const kernel = out ? out.fill(0) : new Float64Array(width * height);
  const wrap = (i: number, n: number): number => ((i % n) + n) % n;
  if (psf.kind === 'image') {
    for (let y = 0; y < psf.height; y++) {
      for (let x = 0; x < psf.width; x++) {
        const k = wrap(y - psf.centreY, height) * width + wrap(x - psf.centreX, width);
        kernel[k] = (kernel[k] as number) + (psf.data[y * psf.width + x] as number);
      }
    }
  } else {
    // No need to go further than a couple of grid periods: beyond that the folded light is below 1e-9 anyway.
    const half = Math.min(psfStampHalfSize(psf), 2 * Math.max(width, height));
    const stamp = psfStamp(psf, 0, 0, half);
    const size = stamp.size;
    for (let j = -half; j <= half; j++) {
      const row = wrap(j, height) * width;
      for (let i = -half; i <= half; i++) {
        const k = row + wrap(i, width);
        kernel[k] = (kernel[k] as number) + (stamp.values[(j + half) * size + (i + half)] as number);
      }
    }
  }
  let sum = 0;
  for (const v of kernel) sum += v;
  for (let k = 0; k < kernel.length; k++) kernel[k] = (kernel[k] as number) / sum;
  return kernel;
}
