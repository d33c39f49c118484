/** Helpers for the buffers shared between the calling thread and the FFT worker. */

/**
 * Smallest grid (pixels) on which `threads: 2` starts a worker: below 512² one transform takes about a
 * millisecond and the two hand-overs per transform (tens of µs each, far more on a busy machine) eat the gain
 * (server/bench, FFT table).
 */
export const THREADS_MIN_PIXELS = 512 * 512;

export function sharedFloat64(length: number): SharedArrayBuffer {
  return new SharedArrayBuffer(length * Float64Array.BYTES_PER_ELEMENT);
}

/** Copies half-spectrum columns [c0, c1) (row-major, `spectrumWidth` per row) from one pair of arrays to another. */
export function copyColumns(
  fromRe: Float64Array,
  fromIm: Float64Array,
  toRe: Float64Array,
  toIm: Float64Array,
  spectrumWidth: number,
  height: number,
  c0: number,
  c1: number,
): void {
  for (let ky = 0; ky < height; ky++) {
    const end = ky * spectrumWidth + c1;
    for (let i = ky * spectrumWidth + c0; i < end; i++) {
      toRe[i] = fromRe[i]!;
      toIm[i] = fromIm[i]!;
    }
  }
}

const scratchByTransform = new WeakMap<object, { re: Float64Array; im: Float64Array }>();

/**
 * A scratch half spectrum tied to one transform object: the Hartley transforms and convolvers that share a
 * RealFft2d also share this (they run one at a time, synchronously), so each extra user costs no scratch memory.
 */
export function scratchSpectrum(fft: { spectrumWidth: number; height: number }): {
  re: Float64Array;
  im: Float64Array;
} {
  let scratch = scratchByTransform.get(fft);
  if (scratch === undefined) {
    const size = fft.spectrumWidth * fft.height;
    scratch = { re: new Float64Array(size), im: new Float64Array(size) };
    scratchByTransform.set(fft, scratch);
  }
  return scratch;
}
