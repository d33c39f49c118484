/**
 * The SIMD kernels of kernels.wat (WASM, four float32 lanes) over arrays that live in one WebAssembly.Memory: a
 * KernelArena is that memory, sized once for the arrays a caller takes from it (it never grows, so its views
 * stay valid), with the kernels bound to it. The float32 separation objective keeps its padded grids there
 * (fit/model.ts); plain JavaScript loops do the same passes where no arena could be had.
 *
 * Measured at 320² (102,400 values; scratch timing loop, one run, medians of 1000 calls): the exp pass 0.70 →
 * 0.20 ms, A ⊙ ξ 0.24 → 0.04 ms, against the JavaScript loops they replace; the whole 256² bench separation
 * went from 4.3 to 3.6 FFT pairs per evaluation.
 */
import { KERNELS_WASM_BASE64 } from './kernels-binary';

interface KernelExports {
  expScaleAdd(s: number, u: number, total: number, n: number, scale: number): number;
  productSum(a: number, b: number, out: number, n: number): number;
  amplitudeTimes(amplitude: number, xi: number, out: number, n: number): number;
  amplitudeGradient(amplitude: number, g: number, xi: number, n: number): void;
}

const PAGE_BYTES = 65536;
/** Largest memory asked for: 4 GiB is the wasm32 limit, and V8 may refuse less. */
const MAX_PAGES = 65536;

let compiled: WebAssembly.Module | null | undefined;

/** The compiled module, or null where this runtime has no WASM SIMD (the callers then use their loops). */
function kernelModule(): WebAssembly.Module | null {
  if (compiled === undefined) {
    try {
      compiled = new WebAssembly.Module(Uint8Array.from(atob(KERNELS_WASM_BASE64), (c) => c.charCodeAt(0)));
    } catch {
      compiled = null;
    }
  }
  return compiled;
}

export class KernelArena {
  private readonly memory: WebAssembly.Memory;
  private readonly kernels: KernelExports;
  private next = 0;

  private constructor(memory: WebAssembly.Memory, kernels: KernelExports) {
    this.memory = memory;
    this.kernels = kernels;
  }

  /**
   * An arena of at least `bytes` bytes (each array takes its length rounded up to 16 bytes), or null when WASM
   * SIMD is missing or the memory cannot be had.
   */
  static create(bytes: number): KernelArena | null {
    const module = kernelModule();
    const pages = Math.ceil(bytes / PAGE_BYTES);
    if (module === null || pages > MAX_PAGES) return null;
    let memory: WebAssembly.Memory;
    try {
      memory = new WebAssembly.Memory({ initial: pages, maximum: pages });
    } catch {
      return null;
    }
    const instance = new WebAssembly.Instance(module, { env: { memory } });
    return new KernelArena(memory, instance.exports as unknown as KernelExports);
  }

  /** Bytes an arena needs for arrays of these byte lengths. */
  static bytesFor(...byteLengths: number[]): number {
    return byteLengths.reduce((sum, b) => sum + Math.ceil(b / 16) * 16, 0);
  }

  /** A zeroed float32 array in the arena (throws when the arena is full: a sizing error of the caller). */
  float32(length: number): Float32Array {
    return new Float32Array(this.memory.buffer, this.take(length * 4), length);
  }

  /** A zeroed float64 array in the arena. */
  float64(length: number): Float64Array {
    return new Float64Array(this.memory.buffer, this.take(length * 8), length);
  }

  /** s = exp(s)·scale in place, total = s + u; returns Σ total (s, u, total: arena float32 arrays, one length). */
  expScaleAdd(s: Float32Array, scale: number, u: Float32Array, total: Float32Array): number {
    const n = this.check(s.length, s, u, total);
    return this.kernels.expScaleAdd(s.byteOffset, u.byteOffset, total.byteOffset, n, scale);
  }

  /** out = a ⊙ b (out may be a or b); returns Σ a ⊙ b. */
  productSum(a: Float32Array, b: Float32Array, out: Float32Array): number {
    const n = this.check(out.length, a, b, out);
    return this.kernels.productSum(a.byteOffset, b.byteOffset, out.byteOffset, n);
  }

  /** out = A ⊙ ξ; returns Σ ½ ξ². */
  amplitudeTimes(amplitude: Float32Array, xi: Float64Array, out: Float32Array): number {
    const n = this.check(out.length, amplitude, xi, out);
    return this.kernels.amplitudeTimes(amplitude.byteOffset, xi.byteOffset, out.byteOffset, n);
  }

  /** g = A ⊙ g + ξ. */
  amplitudeGradient(amplitude: Float32Array, g: Float32Array, xi: Float64Array): void {
    const n = this.check(g.length, amplitude, g, xi);
    this.kernels.amplitudeGradient(amplitude.byteOffset, g.byteOffset, xi.byteOffset, n);
  }

  /** True when `a` is a view on this arena's memory. */
  holds(a: ArrayBufferView): boolean {
    return a.buffer === this.memory.buffer;
  }

  private take(bytes: number): number {
    const offset = this.next;
    const end = offset + Math.ceil(bytes / 16) * 16;
    if (end > this.memory.buffer.byteLength) {
      throw new RangeError(`KernelArena: ${bytes} more bytes do not fit in ${this.memory.buffer.byteLength}`);
    }
    this.next = end;
    return offset;
  }

  /** The common length n (a multiple of 4) of arrays that all live in this arena. */
  private check(n: number, ...arrays: ArrayBufferView[]): number {
    if (n % 4 !== 0) throw new RangeError(`KernelArena: length ${n} is not a multiple of 4`);
    for (const a of arrays) {
      if (!this.holds(a) || a.byteLength / (a as Float32Array).BYTES_PER_ELEMENT !== n) {
        throw new RangeError('KernelArena: arrays must be views of this arena, all of the same length');
      }
    }
    return n;
  }
}
