/**
 * 2-D real FFT computed in float32 by PFFFT (WASM, SIMD), float64 at the interface (layout and normalisation in
 * types.ts). Width must be a multiple of 32 and height a multiple of 16, both 2,3,5-smooth (goodFftSize gives
 * such sizes). The image mean is taken out before rounding to float32 and restored exactly (pffft-core.ts).
 */
import { checkLength } from './check-size';
import { PffftCore } from './pffft-core';
import { pffftComplexLength, pffftRealLength } from './pffft-module';
import type { RealFft2d } from './types';

export class RealFft2dFloat32 implements RealFft2d {
  readonly spectrumWidth: number;
  readonly implementation = 'pffft-wasm-float32';
  private readonly core: PffftCore;
  private readonly rows: Float32Array;

  constructor(
    readonly width: number,
    readonly height: number,
  ) {
    checkFloat32Size(width, height);
    this.core = new PffftCore(width, height);
    this.spectrumWidth = this.core.spectrumWidth;
    this.rows = new Float32Array(width * height);
  }

  forward(input: Float64Array, outRe: Float64Array, outIm: Float64Array): void {
    const { width, height, spectrumWidth } = this;
    checkLength(input, width * height, 'FFT input');
    checkLength(outRe, spectrumWidth * height, 'FFT output (real part)');
    checkLength(outIm, spectrumWidth * height, 'FFT output (imaginary part)');
    const shift = mean(input);
    this.core.forwardRows(input, this.rows, 0, height, shift);
    this.core.forwardColumns(this.rows, outRe, outIm, 0, spectrumWidth, shift * width * height);
  }

  inverse(inRe: Float64Array, inIm: Float64Array, output: Float64Array): void {
    const { width, height, spectrumWidth } = this;
    checkLength(inRe, spectrumWidth * height, 'inverse FFT input (real part)');
    checkLength(inIm, spectrumWidth * height, 'inverse FFT input (imaginary part)');
    checkLength(output, width * height, 'inverse FFT output');
    const n = width * height;
    this.core.inverseColumns(inRe, inIm, this.rows, 0, spectrumWidth, 0);
    this.core.inverseRows(this.rows, output, 0, height, 1 / n, inRe[0]! / n);
  }

  dispose(): void {
    this.core.dispose();
  }
}

/** Throws unless PFFFT takes rows of this width and columns of this height. */
export function checkFloat32Size(width: number, height: number): void {
  if (!pffftRealLength(width)) {
    throw new RangeError(
      `float32 FFT width must be a multiple of 32 with no prime factor above 5, got ${width} (use goodFftSize)`,
    );
  }
  if (!pffftComplexLength(height)) {
    throw new RangeError(
      `float32 FFT height must be a multiple of 16 with no prime factor above 5, got ${height} (use goodFftSize)`,
    );
  }
}

/** Mean of the finite values (0 when there are none), the shift taken out before rounding to float32. */
export function mean(values: Float64Array): number {
  let sum = 0;
  for (let i = 0; i < values.length; i++) sum += values[i]!;
  const m = sum / values.length;
  return Number.isFinite(m) ? m : 0;
}
