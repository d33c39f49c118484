/** The FFT layer: 2-D real FFTs, the orthonormal 2-D Hartley transform, FFT convolution and its adjoint. */
export { goodFftSize, isSmooth235 } from './good-size';
export { createRealFft2d } from './real-fft-2d';
export { MAX_FFT_PIXELS } from './check-size';
export { supportsFloat32 } from './real-fft-2d-float32';
export { createHartley2d, type Hartley2d } from './hartley-2d';
export { createConvolver, kernelFromCentredStamp, type Convolver } from './convolver';
export type { RealFft2d, RealFft2dOptions, TransformOptions, FftPrecision } from './types';
