/**
 * The FFT layer: 2-D real FFTs, the orthonormal 2-D Hartley transform, FFT convolution and its adjoint.
 *
 * Backends (createRealFft2d options): 'float64' (default; mixed-radix TypeScript, any size, fastest on
 * 2,3,5-smooth sizes) and 'float32' (PFFFT in WASM with SIMD, float64 at the interface, sizes from goodFftSize
 * ≥ 32; about twice as fast). `threads: 2` adds a persistent worker on grids ≥ 512² (bit-identical results).
 *
 * Choosing the precision (server/bench/precision.ts, a model-shaped objective on 256² and 512², diffuse ≈ 100σ):
 * float32 moves the objective by ~3e−3 nats and the gradient by ~1e−5 relative; objective differences below
 * ~1e−2 nats are then rounding noise, so a line search on float32 loses its footing once an iteration gains
 * less than that. Use float32 for the bulk of a fit and float64 for the last iterations (or throughout when
 * speed does not matter).
 *
 * Fused paths (types.ts FusedTransforms, float32 on one thread): the Hartley transform and the convolution skip
 * the float64 half spectrum, keep the kernel's spectrum in WASM memory and read and write float32 or float64
 * grids; createHartley2d and createConvolver use them whenever the transform has them (at 1280², one noisy run:
 * convolution 61 → 29 ms, Hartley 29 → 22 ms, against a pair of 46 ms).
 *
 * Sharing: build one RealFft2d per grid and pass it as `{ fft }` to createHartley2d and createConvolver: one
 * worker, one scratch spectrum for all of them.
 */
export { goodFftSize, isSmooth235 } from './good-size';
export { createRealFft2d } from './real-fft-2d';
export { MAX_FFT_PIXELS, realArray } from './check-size';
export { supportsFloat32 } from './real-fft-2d-float32';
export { createHartley2d, type Hartley2d } from './hartley-2d';
export { createConvolver, kernelFromCentredStamp, type Convolver } from './convolver';
export type { RealArray, RealFft2d, RealFft2dOptions, TransformOptions, FftPrecision } from './types';
