/**
 * The float32 2-D real FFT steps on one thread's PFFFT instance, over row and column ranges, so the calling
 * thread and a worker can each take a share (real-fft-2d-float32.ts, fft-worker.ts).
 *
 * Intermediate `rows` (width·height float32, plain or shared between threads): row y holds PFFFT's ordered real
 * spectrum of image row y, [F0, F(w/2), Re F1, Im F1, …, Re F(w/2−1), Im F(w/2−1)].
 * Forward: float64 rows − shift → `rows` → (block copy) WASM → PFFFT real transforms → `rows`. Then blocks of
 * 16 half-spectrum columns are gathered from `rows`, copied to WASM, transformed by PFFFT complex transforms of
 * length height, copied back and written as float64 into the caller's half spectrum (row-major, types.ts).
 * The inverse runs the steps backwards.
 *
 * Speed: element-wise reads and writes of a view on the WASM memory cost ~2 ns here (measured with
 * server/bench), against ~0.5 ns on a plain typed array, so every element-wise pass runs on plain arrays and the
 * WASM memory is only touched by block copies (TypedArray.set, memcpy speed).
 *
 * Accuracy: the shift (the image mean) is removed before rounding to float32 and put back exactly in float64 at
 * F(0, 0) (forward) or as a constant (inverse), so a bright pedestal does not set the rounding level.
 */
import { PFFFT_BACKWARD, PFFFT_COMPLEX, PFFFT_FORWARD, PFFFT_REAL, pffft } from './pffft-module';
import type { RealArray } from './types';

const COLUMN_BLOCK = 16;
const ROW_BLOCK = 16;
const FLOAT_BYTES = 4;

/** A Float32Array view of one WASM allocation, rebuilt when the WASM memory has grown (old views detach). */
class HeapRegion {
  private view: Float32Array;
  constructor(
    readonly pointer: number,
    readonly length: number,
  ) {
    this.view = new Float32Array(pffft.HEAPF32.buffer, pointer, length);
  }
  get(): Float32Array {
    if (this.view.buffer !== pffft.HEAPF32.buffer) {
      this.view = new Float32Array(pffft.HEAPF32.buffer, this.pointer, this.length);
    }
    return this.view;
  }
}

export class PffftCore {
  readonly spectrumWidth: number;
  private readonly rowSetup: number;
  private readonly columnSetup: number;
  private readonly work: number;
  private readonly rowHeap: HeapRegion;
  private readonly columnHeap: HeapRegion;
  /** A second block of columns in WASM memory: the products of convolveColumns. */
  private readonly productHeap: HeapRegion;
  private readonly columnStage: Float32Array;
  private disposed = false;

  constructor(
    readonly width: number,
    readonly height: number,
  ) {
    this.spectrumWidth = width / 2 + 1;
    this.rowSetup = pffft._pffft_new_setup(width, PFFFT_REAL);
    this.columnSetup = pffft._pffft_new_setup(height, PFFFT_COMPLEX);
    if (this.rowSetup === 0 || this.columnSetup === 0) {
      throw new RangeError(`float32 FFT cannot transform a ${width}×${height} grid`);
    }
    const rowFloats = ROW_BLOCK * width;
    const columnFloats = COLUMN_BLOCK * 2 * height;
    this.work = pffft._pffft_aligned_malloc(2 * Math.max(width, height) * FLOAT_BYTES);
    const rowPointer = pffft._pffft_aligned_malloc(rowFloats * FLOAT_BYTES);
    const columnPointer = pffft._pffft_aligned_malloc(columnFloats * FLOAT_BYTES);
    this.rowHeap = new HeapRegion(rowPointer, rowFloats);
    this.columnHeap = new HeapRegion(columnPointer, columnFloats);
    this.productHeap = new HeapRegion(pffft._pffft_aligned_malloc(columnFloats * FLOAT_BYTES), columnFloats);
    this.columnStage = new Float32Array(columnFloats);
  }

  /** Rows [y0, y1) of `input` (width·height, row-major) minus `shift` → ordered row spectra in `rows`. */
  forwardRows(input: RealArray, rows: Float32Array, y0: number, y1: number, shift: number): void {
    subtractInto(input, rows, y0 * this.width, y1 * this.width, shift);
    this.rowTransforms(rows, y0, y1, PFFFT_FORWARD);
  }

  /** Ordered row spectra [y0, y1) → unnormalised image rows, then output = value × scale + shift. */
  inverseRows(rows: Float32Array, output: RealArray, y0: number, y1: number, scale: number, shift: number) {
    this.rowTransforms(rows, y0, y1, PFFFT_BACKWARD);
    scaleInto(rows, output, y0 * this.width, y1 * this.width, scale, shift);
  }

  private rowTransforms(rows: Float32Array, y0: number, y1: number, direction: number): void {
    const { width } = this;
    for (let y = y0; y < y1; y += ROW_BLOCK) {
      const count = Math.min(ROW_BLOCK, y1 - y);
      const heap = this.rowHeap.get();
      heap.set(rows.subarray(y * width, (y + count) * width));
      for (let j = 0; j < count; j++) {
        const pointer = this.rowHeap.pointer + j * width * FLOAT_BYTES;
        pffft._pffft_transform_ordered(this.rowSetup, pointer, pointer, this.work, direction);
      }
      rows.set(count === ROW_BLOCK ? heap : heap.subarray(0, count * width), y * width);
    }
  }

  /** Half-spectrum columns [c0, c1) from the row spectra → float64 half spectrum; `dc` is added to F(0, 0). */
  forwardColumns(
    rows: Float32Array,
    outRe: Float64Array,
    outIm: Float64Array,
    c0: number,
    c1: number,
    dc: number,
  ) {
    const { width, height, spectrumWidth } = this;
    const stage = this.columnStage;
    for (let c = c0; c < c1; c += COLUMN_BLOCK) {
      const count = Math.min(COLUMN_BLOCK, c1 - c);
      // Gather: column kx of row ky is (rows[2kx], rows[2kx+1]); kx = 0 and w/2 are the packed real pair.
      gatherColumns(rows, stage, width, height, c, count);
      this.columnTransforms(count, PFFFT_FORWARD);
      scatterToSpectrum(stage, outRe, outIm, spectrumWidth, height, c, count);
    }
    if (c0 === 0) outRe[0] = outRe[0]! + dc;
  }

  /** Float64 half-spectrum columns [c0, c1), F(0, 0) replaced by `dc`, → unnormalised ordered row spectra. */
  inverseColumns(
    inRe: Float64Array,
    inIm: Float64Array,
    rows: Float32Array,
    c0: number,
    c1: number,
    dc: number,
  ) {
    const { width, height, spectrumWidth } = this;
    const stage = this.columnStage;
    for (let c = c0; c < c1; c += COLUMN_BLOCK) {
      const count = Math.min(COLUMN_BLOCK, c1 - c);
      gatherFromSpectrum(inRe, inIm, stage, spectrumWidth, height, c, count);
      if (c === 0) {
        stage[0] = dc;
        stage[1] = 0;
      }
      this.columnTransforms(count, PFFFT_BACKWARD);
      scatterColumns(stage, rows, width, height, c, count);
    }
  }

  /**
   * The column pass of a kernel's spectrum for convolveColumns: the half-spectrum columns of its row spectra
   * (`rows`, from forwardRows) → forward complex transforms left in PFFFT's internal order, written to WASM
   * memory at `target` (spectrumWidth columns of 2·height floats, allocated by the caller).
   */
  kernelColumns(rows: Float32Array, target: number): void {
    const { width, height, spectrumWidth } = this;
    for (let c = 0; c < spectrumWidth; c += COLUMN_BLOCK) {
      const count = Math.min(COLUMN_BLOCK, spectrumWidth - c);
      gatherColumns(rows, this.columnStage, width, height, c, count);
      this.columnHeap.get().set(this.columnStage);
      for (let j = 0; j < count; j++) {
        const column = this.columnHeap.pointer + j * 2 * height * FLOAT_BYTES;
        pffft._pffft_transform(
          this.columnSetup,
          column,
          target + (c + j) * 2 * height * FLOAT_BYTES,
          this.work,
          PFFFT_FORWARD,
        );
      }
    }
  }

  /**
   * The column pass of a convolution, in place on the row spectra: each half-spectrum column [c0, c1) → forward
   * complex transform (internal order) → times the kernel's column (kernelColumns) and `scaling`, in WASM
   * (pffft_zconvolve_accumulate into a zeroed block) → backward transform → back into `rows`. No float64 half
   * spectrum and no reordering: the product of two spectra does not depend on the order of their elements.
   */
  convolveColumns(rows: Float32Array, kernel: number, scaling: number, c0: number, c1: number): void {
    const { width, height } = this;
    const stage = this.columnStage;
    const column = 2 * height * FLOAT_BYTES;
    for (let c = c0; c < c1; c += COLUMN_BLOCK) {
      const count = Math.min(COLUMN_BLOCK, c1 - c);
      gatherColumns(rows, stage, width, height, c, count);
      this.columnHeap.get().set(stage);
      const product = this.productHeap.get();
      product.fill(0, 0, count * 2 * height);
      for (let j = 0; j < count; j++) {
        const x = this.columnHeap.pointer + j * column;
        const xk = this.productHeap.pointer + j * column;
        pffft._pffft_transform(this.columnSetup, x, x, this.work, PFFFT_FORWARD);
        pffft._pffft_zconvolve_accumulate(this.columnSetup, x, kernel + (c + j) * column, xk, scaling);
        pffft._pffft_transform(this.columnSetup, xk, x, this.work, PFFFT_BACKWARD);
      }
      stage.set(this.columnHeap.get());
      scatterColumns(stage, rows, width, height, c, count);
    }
  }

  /**
   * The column pass of the orthonormal Hartley transform (hartley-2d.ts): half-spectrum columns [c0, c1) of the
   * row spectra → ordered column spectra F → output(k) = (Re F − Im F)·scale and, at the mirrored mode,
   * (Re F + Im F)·scale, written straight into the float64 output grid (width·height); `dc` is added to F(0, 0).
   */
  hartleyColumns(
    rows: Float32Array,
    output: RealArray,
    scale: number,
    dc: number,
    c0: number,
    c1: number,
  ): void {
    const { width, height, spectrumWidth } = this;
    const stage = this.columnStage;
    for (let c = c0; c < c1; c += COLUMN_BLOCK) {
      const count = Math.min(COLUMN_BLOCK, c1 - c);
      gatherColumns(rows, stage, width, height, c, count);
      this.columnTransforms(count, PFFFT_FORWARD);
      if (c === 0) stage[0] = stage[0]! + dc;
      hartleyFromColumns(stage, output, width, height, spectrumWidth, c, count, scale);
    }
  }

  private columnTransforms(count: number, direction: number): void {
    const { height } = this;
    const heap = this.columnHeap.get();
    heap.set(this.columnStage);
    for (let j = 0; j < count; j++) {
      const pointer = this.columnHeap.pointer + j * 2 * height * FLOAT_BYTES;
      pffft._pffft_transform_ordered(this.columnSetup, pointer, pointer, this.work, direction);
    }
    this.columnStage.set(heap);
  }

  dispose(): void {
    if (this.disposed) return;
    this.disposed = true;
    pffft._pffft_destroy_setup(this.rowSetup);
    pffft._pffft_destroy_setup(this.columnSetup);
    for (const pointer of [
      this.work,
      this.rowHeap.pointer,
      this.columnHeap.pointer,
      this.productHeap.pointer,
    ]) {
      pffft._pffft_aligned_free(pointer);
    }
  }
}

function subtractInto(input: RealArray, rows: Float32Array, start: number, end: number, shift: number): void {
  if (shift === 0 && input instanceof Float32Array) rows.set(input.subarray(start, end), start);
  else for (let i = start; i < end; i++) rows[i] = input[i]! - shift;
}

function scaleInto(
  rows: Float32Array,
  output: RealArray,
  start: number,
  end: number,
  scale: number,
  shift: number,
) {
  for (let i = start; i < end; i++) output[i] = rows[i]! * scale + shift;
}

/** stage[j·2h + 2ky (+1)] = column c + j of the ordered row spectra (see the class comment). */
function gatherColumns(
  rows: Float32Array,
  stage: Float32Array,
  width: number,
  height: number,
  c: number,
  count: number,
) {
  const half = width / 2;
  // Interior columns (neither 0 nor w/2) without branches; the two packed real columns afterwards.
  const j0 = c === 0 ? 1 : 0;
  const j1 = c + count - 1 === half ? count - 1 : count;
  for (let ky = 0; ky < height; ky++) {
    const r = ky * width + 2 * c;
    const o = 2 * ky;
    for (let j = j0; j < j1; j++) {
      const h = j * 2 * height + o;
      stage[h] = rows[r + 2 * j]!;
      stage[h + 1] = rows[r + 2 * j + 1]!;
    }
  }
  if (j0 === 1) {
    for (let ky = 0; ky < height; ky++) {
      stage[2 * ky] = rows[ky * width]!;
      stage[2 * ky + 1] = 0;
    }
  }
  if (j1 === count - 1) {
    const h = j1 * 2 * height;
    for (let ky = 0; ky < height; ky++) {
      stage[h + 2 * ky] = rows[ky * width + 1]!;
      stage[h + 2 * ky + 1] = 0;
    }
  }
}

/** The inverse of gatherColumns: columns back into ordered row spectra, imaginary parts of 0 and w/2 dropped. */
function scatterColumns(
  stage: Float32Array,
  rows: Float32Array,
  width: number,
  height: number,
  c: number,
  count: number,
) {
  const half = width / 2;
  const j0 = c === 0 ? 1 : 0;
  const j1 = c + count - 1 === half ? count - 1 : count;
  for (let ky = 0; ky < height; ky++) {
    const r = ky * width + 2 * c;
    const o = 2 * ky;
    for (let j = j0; j < j1; j++) {
      const h = j * 2 * height + o;
      rows[r + 2 * j] = stage[h]!;
      rows[r + 2 * j + 1] = stage[h + 1]!;
    }
  }
  if (j0 === 1) for (let ky = 0; ky < height; ky++) rows[ky * width] = stage[2 * ky]!;
  if (j1 === count - 1) {
    const h = j1 * 2 * height;
    for (let ky = 0; ky < height; ky++) rows[ky * width + 1] = stage[h + 2 * ky]!;
  }
}

/** Hartley values of columns [c, c + count) from their ordered column spectra (PffftCore.hartleyColumns). */
function hartleyFromColumns(
  stage: Float32Array,
  output: RealArray,
  width: number,
  height: number,
  spectrumWidth: number,
  c: number,
  count: number,
  scale: number,
) {
  for (let ky = 0; ky < height; ky++) {
    const row = ky * width;
    // F(w − kx, h − ky) = conj F(kx, ky): the Hartley value there is (Re + Im)·scale.
    const mirror = ((height - ky) % height) * width + width;
    for (let j = 0; j < count; j++) {
      const h = j * 2 * height + 2 * ky;
      const re = stage[h]!;
      const im = stage[h + 1]!;
      const kx = c + j;
      output[row + kx] = (re - im) * scale;
      if (kx > 0 && width - kx >= spectrumWidth) output[mirror - kx] = (re + im) * scale;
    }
  }
}

function scatterToSpectrum(
  stage: Float32Array,
  outRe: Float64Array,
  outIm: Float64Array,
  spectrumWidth: number,
  height: number,
  c: number,
  count: number,
) {
  for (let ky = 0; ky < height; ky++) {
    const o = ky * spectrumWidth + c;
    for (let j = 0; j < count; j++) {
      const h = j * 2 * height + 2 * ky;
      outRe[o + j] = stage[h]!;
      outIm[o + j] = stage[h + 1]!;
    }
  }
}

function gatherFromSpectrum(
  inRe: Float64Array,
  inIm: Float64Array,
  stage: Float32Array,
  spectrumWidth: number,
  height: number,
  c: number,
  count: number,
) {
  for (let ky = 0; ky < height; ky++) {
    const i = ky * spectrumWidth + c;
    for (let j = 0; j < count; j++) {
      const h = j * 2 * height + 2 * ky;
      stage[h] = inRe[i + j]!;
      stage[h + 1] = inIm[i + j]!;
    }
  }
}
