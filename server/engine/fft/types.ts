/**
 * Shared types of the FFT layer.
 *
 * Half-spectrum layout (every RealFft2d): row-major, `spectrumWidth = floor(width / 2) + 1` columns by `height`
 * rows; element (kx, ky) with 0 ≤ kx ≤ floor(width / 2), 0 ≤ ky < height sits at index ky·spectrumWidth + kx.
 * It holds F(kx, ky) = Σ_{x,y} f(x, y) exp(−2πi (kx x / width + ky y / height)) (forward, unnormalised, the sign
 * convention of NumPy/SciPy). The other half follows from Hermitian symmetry F(−k) = conj F(k).
 * `inverse` is normalised (divides by width·height), so inverse(forward(f)) = f.
 */
/** A real grid in float64 or float32 (the fused float32 paths read and write both). */
export type RealArray = Float64Array | Float32Array;

export interface RealFft2d {
  readonly width: number;
  readonly height: number;
  /** floor(width / 2) + 1: the number of columns of the half spectrum. */
  readonly spectrumWidth: number;
  /** Which code runs the transform, for the bench and run records. */
  readonly implementation: string;
  /** `input` width·height row-major; `outRe`, `outIm` spectrumWidth·height (layout above). `input` is kept. */
  forward(input: Float64Array, outRe: Float64Array, outIm: Float64Array): void;
  /**
   * Normalised inverse of a Hermitian half spectrum (the half spectrum of a real image); `inRe`, `inIm` are kept.
   * Imaginary parts that Hermitian symmetry forces to zero (kx = 0 and, for even width, kx = width/2, at ky = 0
   * and, for even height, ky = height/2) are not checked.
   */
  inverse(inRe: Float64Array, inIm: Float64Array, output: Float64Array): void;
  /**
   * The same as inverse, but free to overwrite `re` and `im` (their contents are undefined afterwards). Saves the
   * transform a scratch spectrum (2 · spectrumWidth · height float64) where it can work in place.
   */
  inverseInPlace(re: Float64Array, im: Float64Array, output: Float64Array): void;
  /**
   * Resolves true once every thread asked for is running (at once for one thread), false if the worker could not
   * start (the transform then runs on the calling thread alone). Transforms called before that are still correct:
   * they simply run on the calling thread.
   */
  whenReady(): Promise<boolean>;
  /** Releases worker threads and WASM memory; the object must not be used afterwards. */
  dispose(): void;
  /**
   * Transforms that skip the float64 half spectrum, where the backend has them (the float32 PFFFT backend on one
   * thread): hartley-2d.ts and convolver.ts use them when present.
   */
  readonly fused?: FusedTransforms;
}

/** A kernel's spectrum held by the backend for FusedTransforms.convolve. */
export interface FusedKernel {
  /** Σ kernel (its spectrum at k = 0), in float64. */
  readonly sum: number;
  dispose(): void;
}

export interface FusedTransforms {
  /** output = the orthonormal 2-D Hartley transform of input (hartley-2d.ts); different arrays. `shift`: see
   *  convolve. */
  hartley(input: RealArray, output: RealArray, shift?: number): void;
  /** The spectrum of a kernel (width·height, centred at (0, 0)) for convolve. */
  kernel(kernel: RealArray): FusedKernel;
  /**
   * out = kernel ⊛ x (circular); x and out may be the same array. `shift` is taken out of x before rounding to
   * float32 and put back exactly: the mean of x when omitted (one more pass over x); a caller that knows x has
   * no pedestal passes 0, one that has just computed the mean passes it.
   */
  convolve(x: RealArray, out: RealArray, kernel: FusedKernel, shift?: number): void;
}

export type FftPrecision = 'float64' | 'float32';

export interface RealFft2dOptions {
  /**
   * Arithmetic of the transform. Inputs and outputs are float64 either way; 'float32' converts internally.
   * @default 'float64'
   */
  precision?: FftPrecision;
  /**
   * Threads to use (1 or 2): 2 splits rows and columns between the calling thread and one persistent worker
   * (only on grids of at least 512² pixels; smaller grids run on the calling thread). Results are bit-identical.
   * @default 1
   */
  threads?: 1 | 2;
}

export interface TransformOptions extends RealFft2dOptions {
  /**
   * An existing RealFft2d of the same size to run on (its worker and buffers are reused; it is not disposed
   * with this object). Lets a Hartley transform and a convolver share one worker. `precision` and `threads`
   * are then ignored.
   */
  fft?: RealFft2d;
}
