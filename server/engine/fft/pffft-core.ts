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
    this.columnStage = new Float32Array(columnFloats);
  }

  /** Rows [y0, y1) of `input` (width·height, row-major) minus `shift` → ordered row spectra in `rows`. */
  forwardRows(input: Float64Array, rows: Float32Array, y0: number, y1: number, shift: number): void {
    subtractInto(input, rows, y0 * this.width, y1 * this.width, shift);
    this.rowTransforms(rows, y0, y1, PFFFT_FORWARD);
  }

  /** Ordered row spectra [y0, y1) → unnormalised image rows, then output = value × scale + shift. */
  inverseRows(
    rows: Float32Array,
    output: Float64Array,
    y0: number,
    y1: number,
    scale: number,
    shift: number,
  ) {
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
    for (const pointer of [this.work, this.rowHeap.pointer, this.columnHeap.pointer]) {
      pffft._pffft_aligned_free(pointer);
    }
  }
}

function subtractInto(
  input: Float64Array,
  rows: Float32Array,
  start: number,
  end: number,
  shift: number,
): void {
  for (let i = start; i < end; i++) rows[i] = input[i]! - shift;
}

function scaleInto(
  rows: Float32Array,
  output: Float64Array,
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
