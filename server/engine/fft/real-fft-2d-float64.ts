/**
 * 2-D real FFT in float64, pure TypeScript (see types.ts for the half-spectrum layout and normalisation).
 *
 * Method: the row-column algorithm. Rows: two real rows a, b are packed as z = a + i b into one complex
 * transform Z of length width, then A[k] = (Z[k] + conj Z[−k]) / 2 and B[k] = (Z[k] − conj Z[−k]) / (2i)
 * (the classic two-for-one trick for real sequences, e.g. Press et al., "Numerical Recipes", 3rd ed., §12.3).
 * Columns: complex transforms of length height over blocks of adjacent half-spectrum columns, so every stage
 * streams through contiguous memory. The inverse runs the same steps backwards; it rebuilds the full row
 * spectrum from Hermitian symmetry and unpacks two real rows from one complex inverse.
 * With threads = 2 a persistent worker (fft-thread.ts) takes the lower rows and the right-hand columns, on grids
 * of at least THREADS_MIN_PIXELS (below that the hand-over costs more than it saves).
 */
import { checkFftSize, checkLength } from './check-size';
import { complexForward, createComplexPlan, type ComplexPlan } from './complex-plan';
import {
  COMMAND_FORWARD_COLUMNS,
  COMMAND_FORWARD_ROWS,
  COMMAND_INVERSE_COLUMNS,
  COMMAND_INVERSE_ROWS,
  FftThread,
} from './fft-thread';
import { copyColumns, sharedFloat64, THREADS_MIN_PIXELS } from './shared-buffers';
import type { RealFft2d } from './types';

/** Columns per block in the column pass: 32 columns × height complex values stay in the L2 cache. */
const COLUMN_BLOCK = 32;
/** Row pairs per batched row transform (the same cache budget: 16 pairs × width complex values). */
const ROW_PAIRS = 16;

export class RealFft2dFloat64 implements RealFft2d {
  readonly spectrumWidth: number;
  readonly implementation: string;
  private readonly rowPlan: ComplexPlan;
  private readonly columnPlan: ComplexPlan;
  private readonly zRe: Float64Array;
  private readonly zIm: Float64Array;
  private readonly rowWorkRe: Float64Array;
  private readonly rowWorkIm: Float64Array;
  private readonly columnWorkRe: Float64Array;
  private readonly columnWorkIm: Float64Array;
  /** Scratch spectrum for inverse() (allocated on first use) or the spectrum shared with the worker. */
  private spectrumRe: Float64Array;
  private spectrumIm: Float64Array;
  private readonly thread: FftThread | null = null;
  private readonly rowSplit: number;
  private readonly columnSplit: number;
  private readonly image: Float64Array = new Float64Array(0);

  constructor(
    readonly width: number,
    readonly height: number,
    requestedThreads: 1 | 2 = 1,
  ) {
    checkFftSize(width, height);
    this.spectrumWidth = Math.floor(width / 2) + 1;
    this.rowPlan = createComplexPlan(width);
    this.columnPlan = createComplexPlan(height);
    this.zRe = new Float64Array(width * ROW_PAIRS);
    this.zIm = new Float64Array(width * ROW_PAIRS);
    this.rowWorkRe = new Float64Array(width * ROW_PAIRS);
    this.rowWorkIm = new Float64Array(width * ROW_PAIRS);
    this.columnWorkRe = new Float64Array(height * COLUMN_BLOCK);
    this.columnWorkIm = new Float64Array(height * COLUMN_BLOCK);
    const threads = width * height >= THREADS_MIN_PIXELS ? requestedThreads : 1;
    this.implementation = `typescript-float64${threads === 2 ? '-2-threads' : ''}`;
    // Row pairs stay on one thread: the split is even.
    this.rowSplit = 2 * Math.floor(height / 4);
    this.columnSplit = Math.ceil(this.spectrumWidth / 2);
    if (threads === 2) {
      const [image, re, im] = [width * height, this.spectrumWidth * height, this.spectrumWidth * height].map(
        sharedFloat64,
      );
      this.image = new Float64Array(image!);
      this.spectrumRe = new Float64Array(re!);
      this.spectrumIm = new Float64Array(im!);
      this.thread = new FftThread({
        kind: 'float64',
        width,
        height,
        rowSplit: this.rowSplit,
        columnSplit: this.columnSplit,
        buffers: { image: image!, re: re!, im: im! },
      });
    } else {
      this.spectrumRe = new Float64Array(0);
      this.spectrumIm = new Float64Array(0);
    }
  }

  forward(input: Float64Array, outRe: Float64Array, outIm: Float64Array): void {
    const { width, height, spectrumWidth } = this;
    checkLength(input, width * height, 'FFT input');
    checkLength(outRe, spectrumWidth * height, 'FFT output (real part)');
    checkLength(outIm, spectrumWidth * height, 'FFT output (imaginary part)');
    const { thread, rowSplit, columnSplit, spectrumRe: re, spectrumIm: im } = this;
    if (thread === null || !thread.ready) {
      this.forwardRows(input, outRe, outIm, 0, height);
      this.columns(outRe, outIm, outRe, outIm, 0, spectrumWidth, false);
      return;
    }
    this.image.set(input.subarray(rowSplit * width), rowSplit * width);
    thread.start(COMMAND_FORWARD_ROWS);
    this.forwardRows(input, re, im, 0, rowSplit);
    thread.finish();
    thread.start(COMMAND_FORWARD_COLUMNS);
    this.columns(re, im, outRe, outIm, 0, columnSplit, false);
    thread.finish();
    copyColumns(re, im, outRe, outIm, spectrumWidth, height, columnSplit, spectrumWidth);
  }

  inverse(inRe: Float64Array, inIm: Float64Array, output: Float64Array): void {
    const { width, height, spectrumWidth } = this;
    checkLength(inRe, spectrumWidth * height, 'inverse FFT input (real part)');
    checkLength(inIm, spectrumWidth * height, 'inverse FFT input (imaginary part)');
    checkLength(output, width * height, 'inverse FFT output');
    if (this.thread === null && this.spectrumRe.length === 0) {
      this.spectrumRe = new Float64Array(spectrumWidth * height);
      this.spectrumIm = new Float64Array(spectrumWidth * height);
    }
    const { thread, rowSplit, columnSplit, spectrumRe: re, spectrumIm: im } = this;
    if (thread === null || !thread.ready) {
      this.columns(inRe, inIm, re, im, 0, spectrumWidth, true);
      this.inverseRows(re, im, output, 0, height);
      return;
    }
    copyColumns(inRe, inIm, re, im, spectrumWidth, height, columnSplit, spectrumWidth);
    thread.start(COMMAND_INVERSE_COLUMNS);
    this.columns(inRe, inIm, re, im, 0, columnSplit, true);
    thread.finish();
    thread.start(COMMAND_INVERSE_ROWS);
    this.inverseRows(re, im, output, 0, rowSplit);
    thread.finish();
    output.set(this.image.subarray(rowSplit * width), rowSplit * width);
  }

  inverseInPlace(re: Float64Array, im: Float64Array, output: Float64Array): void {
    if (this.thread !== null) {
      this.inverse(re, im, output);
      return;
    }
    const { width, height, spectrumWidth } = this;
    checkLength(re, spectrumWidth * height, 'inverse FFT input (real part)');
    checkLength(im, spectrumWidth * height, 'inverse FFT input (imaginary part)');
    checkLength(output, width * height, 'inverse FFT output');
    this.columns(re, im, re, im, 0, spectrumWidth, true);
    this.inverseRows(re, im, output, 0, height);
  }

  whenReady(): Promise<boolean> {
    return this.thread === null ? Promise.resolve(true) : this.thread.whenReady();
  }

  dispose(): void {
    this.thread?.dispose();
  }

  /**
   * Row transforms of rows [y0, y1) (y0 even) of `input` into the half-spectrum rows of out. Up to ROW_PAIRS
   * row pairs go through one batched complex transform (layout: position · pairs + pair), so the inner loops
   * run over contiguous memory as in the column pass.
   */
  forwardRows(input: Float64Array, outRe: Float64Array, outIm: Float64Array, y0: number, y1: number): void {
    const { width, spectrumWidth, zRe, zIm } = this;
    for (let y = y0; y < y1; y += 2 * ROW_PAIRS) {
      const pairs = Math.min(ROW_PAIRS, Math.ceil((y1 - y) / 2));
      for (let b = 0; b < pairs; b++) {
        const ya = y + 2 * b;
        const a = ya * width;
        const paired = ya + 1 < y1;
        for (let x = 0; x < width; x++) {
          zRe[x * pairs + b] = input[a + x]!;
          zIm[x * pairs + b] = paired ? input[a + width + x]! : 0;
        }
      }
      complexForward(
        this.rowPlan,
        pairs,
        zRe,
        zIm,
        0,
        pairs,
        zRe,
        zIm,
        0,
        pairs,
        this.rowWorkRe,
        this.rowWorkIm,
      );
      for (let b = 0; b < pairs; b++) {
        const ya = y + 2 * b;
        const paired = ya + 1 < y1;
        const ra = ya * spectrumWidth;
        const rb = ra + spectrumWidth;
        for (let k = 0; k < spectrumWidth; k++) {
          const p = k * pairs + b;
          const c = (k === 0 ? 0 : width - k) * pairs + b;
          const pr = zRe[p]!,
            pi = zIm[p]!,
            cr = zRe[c]!,
            ci = zIm[c]!;
          outRe[ra + k] = 0.5 * (pr + cr);
          outIm[ra + k] = 0.5 * (pi - ci);
          if (paired) {
            outRe[rb + k] = 0.5 * (pi + ci);
            outIm[rb + k] = -0.5 * (pr - cr);
          }
        }
      }
    }
  }

  /** Inverse row transforms of half-spectrum rows [y0, y1) (y0 even) into output rows, scaled by 1/(w·h). */
  inverseRows(
    specRe: Float64Array,
    specIm: Float64Array,
    output: Float64Array,
    y0: number,
    y1: number,
  ): void {
    const { width, height, spectrumWidth, zRe, zIm } = this;
    const scale = 1 / (width * height);
    for (let y = y0; y < y1; y += 2 * ROW_PAIRS) {
      const pairs = Math.min(ROW_PAIRS, Math.ceil((y1 - y) / 2));
      for (let b = 0; b < pairs; b++) {
        const ya = y + 2 * b;
        const paired = ya + 1 < y1;
        const ra = ya * spectrumWidth;
        const rb = ra + spectrumWidth;
        // Z = A + iB on the stored half, Z[k] = conj A[w−k] + i conj B[w−k] on the other.
        for (let k = 0; k < spectrumWidth; k++) {
          const ar = specRe[ra + k]!,
            ai = specIm[ra + k]!;
          const br = paired ? specRe[rb + k]! : 0,
            bi = paired ? specIm[rb + k]! : 0;
          zRe[k * pairs + b] = ar - bi;
          zIm[k * pairs + b] = ai + br;
          if (k > 0 && width - k >= spectrumWidth) {
            zRe[(width - k) * pairs + b] = ar + bi;
            zIm[(width - k) * pairs + b] = br - ai;
          }
        }
      }
      // Inverse = forward with real and imaginary parts swapped.
      complexForward(
        this.rowPlan,
        pairs,
        zIm,
        zRe,
        0,
        pairs,
        zIm,
        zRe,
        0,
        pairs,
        this.rowWorkIm,
        this.rowWorkRe,
      );
      for (let b = 0; b < pairs; b++) {
        const ya = y + 2 * b;
        const a = ya * width;
        for (let x = 0; x < width; x++) output[a + x] = zRe[x * pairs + b]! * scale;
        if (ya + 1 < y1) for (let x = 0; x < width; x++) output[a + width + x] = zIm[x * pairs + b]! * scale;
      }
    }
  }

  /** Column transforms of half-spectrum columns [c0, c1), forward or (unnormalised) inverse. */
  columns(
    inRe: Float64Array,
    inIm: Float64Array,
    outRe: Float64Array,
    outIm: Float64Array,
    c0: number,
    c1: number,
    inverse: boolean,
  ): void {
    const { spectrumWidth } = this;
    for (let c = c0; c < c1; c += COLUMN_BLOCK) {
      const batch = Math.min(COLUMN_BLOCK, c1 - c);
      if (inverse) {
        complexForward(
          this.columnPlan,
          batch,
          inIm,
          inRe,
          c,
          spectrumWidth,
          outIm,
          outRe,
          c,
          spectrumWidth,
          this.columnWorkIm,
          this.columnWorkRe,
        );
      } else {
        complexForward(
          this.columnPlan,
          batch,
          inRe,
          inIm,
          c,
          spectrumWidth,
          outRe,
          outIm,
          c,
          spectrumWidth,
          this.columnWorkRe,
          this.columnWorkIm,
        );
      }
    }
  }
}
