/**
 * Bench-only candidate: a 2-D real FFT built on fft.js (float64 radix-4, power-of-two lengths), two real rows
 * packed into one complex transform, columns gathered into a contiguous buffer. Same layout and normalisation as
 * the engine's RealFft2d (server/engine/fft/types.ts), so the bench can check it against the engine's result.
 */
import FFT from 'fft.js';
import type { RealFft2d } from '../engine/fft';

export class FftJsRealFft2d implements RealFft2d {
  readonly spectrumWidth: number;
  readonly implementation = 'fft.js-float64';
  private readonly rowFft: FFT;
  private readonly columnFft: FFT;
  private readonly rowIn: Float64Array;
  private readonly rowOut: Float64Array;
  private readonly columnIn: Float64Array;
  private readonly columnOut: Float64Array;
  private readonly spectrum: Float64Array;

  constructor(
    readonly width: number,
    readonly height: number,
  ) {
    if ((width & (width - 1)) !== 0 || (height & (height - 1)) !== 0 || width < 4 || height < 4) {
      throw new RangeError(`fft.js needs power-of-two sizes of at least 4, got ${width}×${height}`);
    }
    this.spectrumWidth = width / 2 + 1;
    this.rowFft = new FFT(width);
    this.columnFft = new FFT(height);
    this.rowIn = new Float64Array(2 * width);
    this.rowOut = new Float64Array(2 * width);
    this.columnIn = new Float64Array(2 * height);
    this.columnOut = new Float64Array(2 * height);
    this.spectrum = new Float64Array(2 * this.spectrumWidth * height);
  }

  forward(input: Float64Array, outRe: Float64Array, outIm: Float64Array): void {
    const { width, height, spectrumWidth: sw, rowIn, rowOut, spectrum } = this;
    for (let y = 0; y < height; y += 2) {
      for (let x = 0; x < width; x++) {
        rowIn[2 * x] = input[y * width + x]!;
        rowIn[2 * x + 1] = input[(y + 1) * width + x]!;
      }
      this.rowFft.transform(rowOut, rowIn);
      for (let k = 0; k < sw; k++) {
        const kk = k === 0 ? 0 : width - k;
        const pr = rowOut[2 * k]!,
          pi = rowOut[2 * k + 1]!,
          cr = rowOut[2 * kk]!,
          ci = rowOut[2 * kk + 1]!;
        const a = 2 * (y * sw + k),
          b = a + 2 * sw;
        spectrum[a] = 0.5 * (pr + cr);
        spectrum[a + 1] = 0.5 * (pi - ci);
        spectrum[b] = 0.5 * (pi + ci);
        spectrum[b + 1] = -0.5 * (pr - cr);
      }
    }
    for (let k = 0; k < sw; k++) {
      for (let y = 0; y < height; y++) {
        this.columnIn[2 * y] = spectrum[2 * (y * sw + k)]!;
        this.columnIn[2 * y + 1] = spectrum[2 * (y * sw + k) + 1]!;
      }
      this.columnFft.transform(this.columnOut, this.columnIn);
      for (let y = 0; y < height; y++) {
        outRe[y * sw + k] = this.columnOut[2 * y]!;
        outIm[y * sw + k] = this.columnOut[2 * y + 1]!;
      }
    }
  }

  inverse(inRe: Float64Array, inIm: Float64Array, output: Float64Array): void {
    const { width, height, spectrumWidth: sw, rowIn, rowOut, spectrum } = this;
    for (let k = 0; k < sw; k++) {
      for (let y = 0; y < height; y++) {
        this.columnIn[2 * y] = inRe[y * sw + k]!;
        this.columnIn[2 * y + 1] = inIm[y * sw + k]!;
      }
      // fft.js's inverseTransform divides by the length.
      this.columnFft.inverseTransform(this.columnOut, this.columnIn);
      for (let y = 0; y < height; y++) {
        spectrum[2 * (y * sw + k)] = this.columnOut[2 * y]!;
        spectrum[2 * (y * sw + k) + 1] = this.columnOut[2 * y + 1]!;
      }
    }
    for (let y = 0; y < height; y += 2) {
      for (let k = 0; k < sw; k++) {
        const a = 2 * (y * sw + k),
          b = a + 2 * sw;
        const ar = spectrum[a]!,
          ai = spectrum[a + 1]!,
          br = spectrum[b]!,
          bi = spectrum[b + 1]!;
        rowIn[2 * k] = ar - bi;
        rowIn[2 * k + 1] = ai + br;
        if (k > 0 && k < width / 2) {
          rowIn[2 * (width - k)] = ar + bi;
          rowIn[2 * (width - k) + 1] = br - ai;
        }
      }
      this.rowFft.inverseTransform(rowOut, rowIn);
      for (let x = 0; x < width; x++) {
        output[y * width + x] = rowOut[2 * x]!;
        output[(y + 1) * width + x] = rowOut[2 * x + 1]!;
      }
    }
  }

  inverseInPlace(re: Float64Array, im: Float64Array, output: Float64Array): void {
    this.inverse(re, im, output);
  }

  whenReady(): Promise<boolean> {
    return Promise.resolve(true);
  }

  dispose(): void {}
}
