/**
 * 2-D real FFT computed in float32 by PFFFT (WASM, SIMD), float64 at the interface (layout and normalisation in
 * types.ts). Width must be a multiple of 32 and height a multiple of 16, both 2,3,5-smooth (goodFftSize gives
 * such sizes). The image mean is taken out before rounding to float32 and restored exactly (pffft-core.ts).
 * With threads = 2 a persistent worker (fft-thread.ts) takes the lower rows and the right-hand columns, on grids
 * of at least THREADS_MIN_PIXELS (below that the hand-over costs more than it saves).
 */
import { checkLength } from './check-size';
import {
  COMMAND_FORWARD_COLUMNS,
  COMMAND_FORWARD_ROWS,
  COMMAND_INVERSE_COLUMNS,
  COMMAND_INVERSE_ROWS,
  FftThread,
} from './fft-thread';
import { PffftCore } from './pffft-core';
import { pffftComplexLength, pffftRealLength } from './pffft-module';
import { copyColumns, sharedFloat64, THREADS_MIN_PIXELS } from './shared-buffers';
import { pffft } from './pffft-module';
import type { FusedKernel, FusedTransforms, RealArray, RealFft2d } from './types';

export class RealFft2dFloat32 implements RealFft2d {
  readonly spectrumWidth: number;
  readonly implementation: string;
  private readonly core: PffftCore;
  private readonly rows: Float32Array;
  private readonly thread: FftThread | null = null;
  private readonly rowSplit: number;
  private readonly columnSplit: number;
  private readonly image: Float64Array = new Float64Array(0);
  private readonly re: Float64Array = new Float64Array(0);
  private readonly im: Float64Array = new Float64Array(0);
  readonly fused: FusedTransforms | undefined;

  constructor(
    readonly width: number,
    readonly height: number,
    requestedThreads: 1 | 2 = 1,
  ) {
    checkFloat32Size(width, height);
    this.core = new PffftCore(width, height);
    this.spectrumWidth = this.core.spectrumWidth;
    this.rowSplit = Math.floor(height / 2);
    this.columnSplit = Math.min(this.spectrumWidth, 16 * Math.ceil(this.spectrumWidth / 32));
    const threads = width * height >= THREADS_MIN_PIXELS ? requestedThreads : 1;
    this.implementation = `pffft-wasm-float32${threads === 2 ? '-2-threads' : ''}`;
    if (threads === 2) {
      const rows = new SharedArrayBuffer(width * height * Float32Array.BYTES_PER_ELEMENT);
      this.rows = new Float32Array(rows);
      const [image, re, im] = [
        sharedFloat64(width * height),
        sharedFloat64(this.spectrumWidth * height),
        sharedFloat64(this.spectrumWidth * height),
      ];
      this.image = new Float64Array(image);
      this.re = new Float64Array(re);
      this.im = new Float64Array(im);
      this.thread = new FftThread({
        kind: 'float32',
        width,
        height,
        rowSplit: this.rowSplit,
        columnSplit: this.columnSplit,
        buffers: { rows, image, re, im },
      });
    } else {
      this.rows = new Float32Array(width * height);
      this.fused = new PffftFused(this.core, this.rows);
    }
  }

  forward(input: Float64Array, outRe: Float64Array, outIm: Float64Array): void {
    const { width, height, spectrumWidth, core, rows, thread } = this;
    checkLength(input, width * height, 'FFT input');
    checkLength(outRe, spectrumWidth * height, 'FFT output (real part)');
    checkLength(outIm, spectrumWidth * height, 'FFT output (imaginary part)');
    const shift = mean(input);
    const dc = shift * width * height;
    if (thread === null || !thread.ready) {
      core.forwardRows(input, rows, 0, height, shift);
      core.forwardColumns(rows, outRe, outIm, 0, spectrumWidth, dc);
      return;
    }
    const { rowSplit, columnSplit } = this;
    this.image.set(input.subarray(rowSplit * width), rowSplit * width);
    thread.params[0] = shift;
    thread.start(COMMAND_FORWARD_ROWS);
    core.forwardRows(input, rows, 0, rowSplit, shift);
    thread.finish();
    thread.start(COMMAND_FORWARD_COLUMNS);
    core.forwardColumns(rows, outRe, outIm, 0, columnSplit, dc);
    thread.finish();
    copyColumns(this.re, this.im, outRe, outIm, spectrumWidth, height, columnSplit, spectrumWidth);
  }

  inverse(inRe: Float64Array, inIm: Float64Array, output: Float64Array): void {
    const { width, height, spectrumWidth, core, rows, thread } = this;
    checkLength(inRe, spectrumWidth * height, 'inverse FFT input (real part)');
    checkLength(inIm, spectrumWidth * height, 'inverse FFT input (imaginary part)');
    checkLength(output, width * height, 'inverse FFT output');
    const n = width * height;
    const shift = inRe[0]! / n;
    if (thread === null || !thread.ready) {
      core.inverseColumns(inRe, inIm, rows, 0, spectrumWidth, 0);
      core.inverseRows(rows, output, 0, height, 1 / n, shift);
      return;
    }
    const { rowSplit, columnSplit } = this;
    copyColumns(inRe, inIm, this.re, this.im, spectrumWidth, height, columnSplit, spectrumWidth);
    thread.start(COMMAND_INVERSE_COLUMNS);
    core.inverseColumns(inRe, inIm, rows, 0, columnSplit, 0);
    thread.finish();
    thread.params[0] = shift;
    thread.params[1] = 1 / n;
    thread.start(COMMAND_INVERSE_ROWS);
    core.inverseRows(rows, output, 0, rowSplit, 1 / n, shift);
    thread.finish();
    output.set(this.image.subarray(rowSplit * width), rowSplit * width);
  }

  inverseInPlace(re: Float64Array, im: Float64Array, output: Float64Array): void {
    this.inverse(re, im, output);
  }

  whenReady(): Promise<boolean> {
    return this.thread === null ? Promise.resolve(true) : this.thread.whenReady();
  }

  dispose(): void {
    this.thread?.dispose();
    this.core.dispose();
  }
}

/**
 * The fused transforms of one single-threaded PFFFT grid (types.ts FusedTransforms): row transforms as in
 * forward/inverse, and the column pass done by PffftCore.hartleyColumns / convolveColumns without the float64
 * half spectrum (about a third of the time of a forward + inverse pair goes into writing and reading it).
 * The mean is taken out before rounding to float32 as in forward: K ⊛ x = K ⊛ (x − m) + m·ΣK.
 */
class PffftFused implements FusedTransforms {
  private readonly width: number;
  private readonly height: number;

  constructor(
    private readonly core: PffftCore,
    private readonly rows: Float32Array,
  ) {
    this.width = core.width;
    this.height = core.height;
  }

  hartley(input: RealArray, output: RealArray, shift = mean(input)): void {
    const { width, height, core, rows } = this;
    checkLength(input, width * height, 'Hartley input');
    checkLength(output, width * height, 'Hartley output');
    core.forwardRows(input, rows, 0, height, shift);
    const n = width * height;
    core.hartleyColumns(rows, output, 1 / Math.sqrt(n), shift * n, 0, core.spectrumWidth);
  }

  kernel(kernel: RealArray): FusedKernel {
    const { width, height, core, rows } = this;
    checkLength(kernel, width * height, 'convolution kernel');
    const spectrum = new PffftKernel(core.spectrumWidth * 2 * height, kernel);
    core.forwardRows(kernel, rows, 0, height, 0);
    core.kernelColumns(rows, spectrum.pointer);
    return spectrum;
  }

  convolve(x: RealArray, out: RealArray, kernel: FusedKernel, shift = mean(x)): void {
    const { width, height, core, rows } = this;
    checkLength(x, width * height, 'convolution input');
    checkLength(out, width * height, 'convolution output');
    if (!(kernel instanceof PffftKernel) || kernel.floats !== core.spectrumWidth * 2 * height) {
      throw new RangeError('convolve needs a kernel spectrum made by this transform');
    }
    core.forwardRows(x, rows, 0, height, shift);
    core.convolveColumns(rows, kernel.pointer, 1 / (width * height), 0, core.spectrumWidth);
    core.inverseRows(rows, out, 0, height, 1, shift * kernel.sum);
  }
}

/** A kernel's column spectra in WASM memory (PffftCore.kernelColumns), freed by dispose. */
class PffftKernel implements FusedKernel {
  readonly pointer: number;
  readonly sum: number;
  private disposed = false;

  constructor(
    readonly floats: number,
    kernel: RealArray,
  ) {
    this.pointer = pffft._pffft_aligned_malloc(floats * Float32Array.BYTES_PER_ELEMENT);
    if (this.pointer === 0) throw new RangeError(`no WASM memory for a kernel spectrum of ${floats} floats`);
    let sum = 0;
    for (let i = 0; i < kernel.length; i++) sum += kernel[i]!;
    this.sum = sum;
  }

  dispose(): void {
    if (this.disposed) return;
    this.disposed = true;
    pffft._pffft_aligned_free(this.pointer);
  }
}

/** True when the float32 backend takes a width × height grid (goodFftSize sizes ≥ 32 always are). */
export function supportsFloat32(width: number, height: number): boolean {
  return pffftRealLength(width) && pffftComplexLength(height);
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

/** Mean of the values (0 when it is not finite), the shift taken out before rounding to float32. */
export function mean(values: RealArray): number {
  let sum = 0;
  for (let i = 0; i < values.length; i++) sum += values[i]!;
  const m = sum / values.length;
  return Number.isFinite(m) ? m : 0;
}
