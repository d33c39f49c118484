/**
 * createRealFft2d: picks the backend of a 2-D real FFT (layout and normalisation in types.ts).
 */
import { checkFftSize } from './check-size';
import { RealFft2dFloat32 } from './real-fft-2d-float32';
import { RealFft2dFloat64 } from './real-fft-2d-float64';
import type { RealFft2d, RealFft2dOptions } from './types';

export function createRealFft2d(width: number, height: number, options: RealFft2dOptions = {}): RealFft2d {
  checkFftSize(width, height);
  const precision = options.precision ?? 'float64';
  if (precision === 'float32') return new RealFft2dFloat32(width, height);
  if (precision !== 'float64')
    throw new RangeError(`FFT precision must be float64 or float32, got ${String(precision)}`);
  return new RealFft2dFloat64(width, height);
}
