import type { FftPrecision, RealArray } from './types';

/** Largest grid the FFT layer accepts (2^28 pixels ≈ 2 GiB per float64 image): beyond it typed arrays fail. */
export const MAX_FFT_PIXELS = 2 ** 28;

/** Throws a short, specific message unless width and height are positive integers within MAX_FFT_PIXELS. */
export function checkFftSize(width: number, height: number): void {
  for (const [name, value] of [
    ['width', width],
    ['height', height],
  ] as const) {
    if (!Number.isInteger(value) || value < 1) {
      throw new RangeError(`FFT ${name} must be a positive integer, got ${String(value)}`);
    }
  }
  if (width * height > MAX_FFT_PIXELS) {
    throw new RangeError(`FFT grid ${width}×${height} is too large: at most ${MAX_FFT_PIXELS} pixels`);
  }
}

/** A zeroed array of `length` values of the type a transform of this precision takes without conversion. */
export function realArray(precision: FftPrecision, length: number): RealArray {
  return precision === 'float32' ? new Float32Array(length) : new Float64Array(length);
}

/** The grid itself when it is float64 (the transforms without fused paths take no other); `what` names the
 *  operation in the message. */
export function asFloat64(array: Float64Array | Float32Array, what: string): Float64Array {
  if (!(array instanceof Float64Array)) throw new TypeError(`${what} takes float64 grids only`);
  return array;
}

/** Throws unless `array` has exactly `length` elements; `what` names the argument in the message. */
export function checkLength(array: { length: number }, length: number, what: string): void {
  if (array.length !== length) {
    throw new RangeError(`${what} must have ${length} elements, got ${array.length}`);
  }
}
