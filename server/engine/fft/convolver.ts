/**
 * Circular convolution with a fixed kernel on a padded width × height grid, and its adjoint (correlation).
 *
 * apply:   out = k ⊛ x,  out(p) = Σ_q k(p − q) x(q)   (indices modulo the grid)
 * adjoint: out = k ⋆ x,  out(q) = Σ_p k(p − q) x(p),  so ⟨k ⊛ x, y⟩ = ⟨x, k ⋆ y⟩.
 * Both by the convolution theorem: one forward and one inverse real FFT each, with the kernel's spectrum K
 * computed once; the adjoint multiplies by conj K. The kernel is given on the same grid with its centre at pixel
 * (0, 0) and wrap-around (see kernelFromCentredStamp); the convolver does not normalise it.
 * A centro-symmetric kernel (k(−p) = k(p) exactly, e.g. a centred Gaussian PSF) has a real spectrum: only the real
 * part is kept, and apply and adjoint are the same operation.
 */
import { asFloat64, checkLength } from './check-size';
import { transformFor } from './real-fft-2d';
import { scratchSpectrum } from './shared-buffers';
import type { FusedKernel, RealArray, RealFft2d, TransformOptions } from './types';

export interface Convolver {
  readonly width: number;
  readonly height: number;
  readonly implementation: string;
  /**
   * out = kernel ⊛ x (width·height row-major each). `x` and `out` may be the same array. `shift`: a value near
   * the mean of x for the float32 transforms to take out before rounding (types.ts FusedTransforms.convolve;
   * computed when omitted, 0 for data without a pedestal); other backends ignore it.
   */
  apply(x: RealArray, out: RealArray, shift?: number): void;
  /** out = kernel ⋆ x, the adjoint of apply. `x` and `out` may be the same array; `shift` as for apply. */
  adjoint(x: RealArray, out: RealArray, shift?: number): void;
  dispose(): void;
}

export function createConvolver(
  width: number,
  height: number,
  kernel: RealArray,
  options: TransformOptions = {},
): Convolver {
  const fft = transformFor(width, height, options);
  checkLength(kernel, width * height, 'convolution kernel');
  for (let i = 0; i < kernel.length; i++) {
    if (!Number.isFinite(kernel[i]!)) {
      if (options.fft === undefined) fft.dispose();
      throw new RangeError(`convolution kernel has a non-finite value at pixel ${i}`);
    }
  }
  return new FftConvolver(fft, kernel, options.fft === undefined);
}

class FftConvolver implements Convolver {
  readonly width: number;
  readonly height: number;
  readonly implementation: string;
  private readonly kernelRe: Float64Array;
  /** null for a centro-symmetric kernel (real spectrum). */
  private readonly kernelIm: Float64Array | null;
  private readonly re: Float64Array;
  private readonly im: Float64Array;

  /** The backend's own kernel spectra (fused path, types.ts): of k, and of k(−p) for the adjoint (null when
   *  the kernel is centro-symmetric, so the two are the same). The float64 spectra are then not kept. */
  private readonly fused: { apply: FusedKernel; adjoint: FusedKernel | null } | null = null;

  constructor(
    private readonly fft: RealFft2d,
    kernel: RealArray,
    private readonly ownsFft: boolean,
  ) {
    this.width = fft.width;
    this.height = fft.height;
    this.implementation = fft.implementation;
    const symmetric = isCentroSymmetric(kernel, fft.width, fft.height);
    if (fft.fused) {
      this.re = this.im = this.kernelRe = new Float64Array(0);
      this.kernelIm = null;
      const apply = fft.fused.kernel(kernel);
      this.fused = {
        apply,
        adjoint: symmetric ? null : fft.fused.kernel(mirrored(kernel, fft.width, fft.height)),
      };
      return;
    }
    ({ re: this.re, im: this.im } = scratchSpectrum(fft));
    this.kernelRe = new Float64Array(fft.spectrumWidth * fft.height);
    fft.forward(asFloat64(kernel, 'the convolution kernel of a float64 transform'), this.kernelRe, this.im);
    this.kernelIm = symmetric ? null : this.im.slice();
  }

  apply(x: RealArray, out: RealArray, shift?: number): void {
    if (this.fused) this.fft.fused!.convolve(x, out, this.fused.apply, shift);
    else this.run(asFloat64(x, WHAT), asFloat64(out, WHAT), 1);
  }

  adjoint(x: RealArray, out: RealArray, shift?: number): void {
    if (this.fused) this.fft.fused!.convolve(x, out, this.fused.adjoint ?? this.fused.apply, shift);
    else this.run(asFloat64(x, WHAT), asFloat64(out, WHAT), -1);
  }

  private run(x: Float64Array, out: Float64Array, conjugate: 1 | -1): void {
    const { re, im, kernelRe, kernelIm } = this;
    this.fft.forward(x, re, im);
    if (kernelIm === null) {
      for (let i = 0; i < re.length; i++) {
        re[i] = re[i]! * kernelRe[i]!;
        im[i] = im[i]! * kernelRe[i]!;
      }
    } else {
      for (let i = 0; i < re.length; i++) {
        const xr = re[i]!;
        const xi = im[i]!;
        const kr = kernelRe[i]!;
        const ki = conjugate * kernelIm[i]!;
        re[i] = xr * kr - xi * ki;
        im[i] = xr * ki + xi * kr;
      }
    }
    this.fft.inverseInPlace(re, im, out);
  }

  dispose(): void {
    this.fused?.apply.dispose();
    this.fused?.adjoint?.dispose();
    if (this.ownsFft) this.fft.dispose();
  }
}

/** For asFloat64's message on the path without fusion. */
const WHAT = 'this convolution';

/** k(−x, −y) on the periodic grid: its spectrum is conj K, so convolving with it is the adjoint. */
function mirrored(kernel: RealArray, width: number, height: number): Float64Array {
  const out = new Float64Array(kernel.length);
  for (let y = 0; y < height; y++) {
    const my = (height - y) % height;
    for (let x = 0; x < width; x++) out[my * width + ((width - x) % width)] = kernel[y * width + x]!;
  }
  return out;
}

/** True when k(−x, −y) = k(x, y) exactly on the periodic grid. */
function isCentroSymmetric(kernel: RealArray, width: number, height: number): boolean {
  for (let y = 0; y < height; y++) {
    const my = (height - y) % height;
    for (let x = 0; x < width; x++) {
      if (kernel[y * width + x] !== kernel[my * width + ((width - x) % width)]) return false;
    }
  }
  return true;
}

/**
 * Places a PSF stamp (sw × sh, row-major) on a width × height grid with its centre pixel at (0, 0), wrapping
 * negative offsets to the far edges: stamp pixel (i, j) goes to ((i − cx) mod width, (j − cy) mod height) with
 * cx = floor(sw / 2), cy = floor(sh / 2) (the middle pixel for odd sizes, the one right of/below the middle for
 * even sizes). The stamp is copied as given, not normalised.
 */
export function kernelFromCentredStamp(
  stamp: Float64Array,
  stampWidth: number,
  stampHeight: number,
  width: number,
  height: number,
): Float64Array {
  if (!Number.isInteger(stampWidth) || !Number.isInteger(stampHeight) || stampWidth < 1 || stampHeight < 1) {
    throw new RangeError(`PSF stamp size must be positive integers, got ${stampWidth}×${stampHeight}`);
  }
  checkLength(stamp, stampWidth * stampHeight, 'PSF stamp');
  if (stampWidth > width || stampHeight > height) {
    throw new RangeError(
      `PSF stamp ${stampWidth}×${stampHeight} is larger than the FFT grid ${width}×${height}`,
    );
  }
  const kernel = new Float64Array(width * height);
  const cx = Math.floor(stampWidth / 2);
  const cy = Math.floor(stampHeight / 2);
  for (let j = 0; j < stampHeight; j++) {
    const y = (j - cy + height) % height;
    for (let i = 0; i < stampWidth; i++) {
      const x = (i - cx + width) % width;
      kernel[y * width + x] = stamp[j * stampWidth + i]!;
    }
  }
  return kernel;
}
