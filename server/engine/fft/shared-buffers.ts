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
