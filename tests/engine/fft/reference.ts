/**
 * Test helpers: a naive O(N²) 2-D DFT straight from the definition
 * F(kx, ky) = Σ_{x,y} f(x, y) exp(−2πi (kx x / W + ky y / H)) (the sign convention of NumPy/SciPy), and a seeded
 * random input (mulberry32, server/engine/random), so the FFT tests compare against something outside the code under test.
 */
import { seededRandom } from '../../../server/engine/random/mulberry32';

export function naiveDft2d(
  input: Float64Array,
  width: number,
  height: number,
): { re: Float64Array; im: Float64Array } {
  const re = new Float64Array(width * height);
  const im = new Float64Array(width * height);
  for (let ky = 0; ky < height; ky++) {
    for (let kx = 0; kx < width; kx++) {
      let sr = 0;
      let si = 0;
      for (let y = 0; y < height; y++) {
        for (let x = 0; x < width; x++) {
          // Reduce the phase modulo 1 exactly in integers before the trigonometry.
          const turns = ((kx * x) % width) / width + ((ky * y) % height) / height;
          const angle = -2 * Math.PI * turns;
          const v = input[y * width + x]!;
          sr += v * Math.cos(angle);
          si += v * Math.sin(angle);
        }
      }
      re[ky * width + kx] = sr;
      im[ky * width + kx] = si;
    }
  }
  return { re, im };
}

export function randomArray(n: number, seed: number, offset = 0): Float64Array {
  const next = seededRandom(seed);
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = next() * 2 - 1 + offset;
  return out;
}

export function maxAbs(a: Float64Array): number {
  let m = 0;
  for (const v of a) m = Math.max(m, Math.abs(v));
  return m;
}

export function maxAbsDifference(a: Float64Array, b: Float64Array): { value: number; index: number } {
  let value = 0;
  let index = -1;
  for (let i = 0; i < a.length; i++) {
    const d = Math.abs(a[i]! - b[i]!);
    if (d > value || Number.isNaN(d)) {
      value = d;
      index = i;
    }
  }
  return { value, index };
}

export function dot(a: Float64Array, b: Float64Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i]! * b[i]!;
  return s;
}

/** Direct orthonormal DHT from its definition, H(k) = N^−½ Σ f(x) cas(2π(kx x/W + ky y/H)) (Bracewell 1986). */
export function naiveHartley(input: Float64Array, width: number, height: number): Float64Array {
  const out = new Float64Array(width * height);
  const scale = 1 / Math.sqrt(width * height);
  for (let ky = 0; ky < height; ky++) {
    for (let kx = 0; kx < width; kx++) {
      let s = 0;
      for (let y = 0; y < height; y++) {
        for (let x = 0; x < width; x++) {
          const angle = 2 * Math.PI * (((kx * x) % width) / width + ((ky * y) % height) / height);
          s += input[y * width + x]! * (Math.cos(angle) + Math.sin(angle));
        }
      }
      out[ky * width + kx] = s * scale;
    }
  }
  return out;
}

/** Direct circular convolution Σ_q k(p − q) x(q) and correlation Σ_p k(p − q) x(p). */
export function naiveConvolve(
  kernel: Float64Array,
  x: Float64Array,
  width: number,
  height: number,
  adjoint: boolean,
) {
  const out = new Float64Array(width * height);
  for (let py = 0; py < height; py++) {
    for (let px = 0; px < width; px++) {
      let s = 0;
      for (let qy = 0; qy < height; qy++) {
        for (let qx = 0; qx < width; qx++) {
          const dx = adjoint ? (qx - px + width) % width : (px - qx + width) % width;
          const dy = adjoint ? (qy - py + height) % height : (py - qy + height) % height;
          s += kernel[dy * width + dx]! * x[qy * width + qx]!;
        }
      }
      out[py * width + px] = s;
    }
  }
  return out;
}
