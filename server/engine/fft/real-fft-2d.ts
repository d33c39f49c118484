/**
 * createRealFft2d: picks the backend of a 2-D real FFT (layout and normalisation in types.ts).
 */
import { checkFftSize } from './check-size';
import { RealFft2dFloat32 } from './real-fft-2d-float32';
import { RealFft2dFloat64 } from './real-fft-2d-float64';
import type { RealFft2d, RealFft2dOptions, TransformOptions } from './types';

export function createRealFft2d(width: number, height: number, options: RealFft2dOptions = {}): RealFft2d {
  checkFftSize(width, height);
  const precision = options.precision ?? 'float64';
  const threads = options.threads ?? 1;
  if (threads !== 1 && threads !== 2)
    throw new RangeError(`FFT threads must be 1 or 2, got ${String(threads)}`);
  if (precision === 'float32') return new RealFft2dFloat32(width, height, threads);
  if (precision !== 'float64')
    throw new RangeError(`FFT precision must be float64 or float32, got ${String(precision)}`);
  return new RealFft2dFloat64(width, height, threads);
}

/** The transform a Hartley or convolver object runs on: the given shared one (checked) or a new one. */
export function transformFor(width: number, height: number, options: TransformOptions): RealFft2d {
  checkFftSize(width, height);
  const shared = options.fft;
  if (shared === undefined) return createRealFft2d(width, height, options);
  if (shared.width !== width || shared.height !== height) {
    throw new RangeError(`shared FFT is ${shared.width}×${shared.height}, expected ${width}×${height}`);
  }
  return shared;
}
