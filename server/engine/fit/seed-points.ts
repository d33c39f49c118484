/**
 * Seeding compact-source pixels from matched-filter maxima of the residual (METHOD-NOTES: a pixel that is "off"
 * has u ≈ q/α and a gradient in τ of about zero, so no gradient method switches it on by itself).
 *
 * For a point of flux F at pixel p, the residual r = d − model ≈ F·K(· − p) + noise. Its maximum-likelihood
 * flux with per-pixel weights w (1/σ², or 1/λ for Poisson) is the matched filter
 *   F̂(p) = [K ⋆ (w r)](p) / [K² ⋆ w](p),   σ_F(p) = 1 / √([K² ⋆ w](p)),
 * (generalised least squares for one amplitude; any linear-models text). Local maxima (3 × 3) of F̂/σ_F above
 * `snr` become seeds: u_p ← u_p + F̂(p), i.e. τ_p = log(u_p + F̂(p)).
 */
import { realArray, type Convolver, type FftPrecision, type RealArray } from '../fft';

export interface SeedInput {
  width: number;
  height: number;
  pw: number;
  ph: number;
  /** residual d − model on the image grid */
  residual: RealArray;
  /** likelihood weight per image pixel (0 = masked) */
  weight: Float64Array;
  /** convolver with the PSF kernel K (adjoint gives K ⋆) */
  psf: Convolver;
  /** convolver with K² (elementwise square of the kernel) */
  psfSquared: Convolver;
  /** the arithmetic of both convolvers: their padded grids are float32 arrays for float32 transforms */
  precision: FftPrecision;
  /** Two padded grids of that type to work in (overwritten), and an image-sized one; allocated when absent. */
  scratch?: { num: RealArray; den: RealArray; ratio: Float32Array };
  snr: number;
}

export interface Seed {
  index: number;
  flux: number;
  snr: number;
}

export function matchedFilterSeeds(input: SeedInput): Seed[] {
  const { width, height, pw, ph, residual, weight, psf, psfSquared, snr } = input;
  // float32 maps with float32 transforms, and F̂/σ_F in float32 (it only picks the maxima; a seed's F̂ and
  // F̂/σ_F are computed at them): at 4096² the four float64 maps took about 0.7 GiB
  const num = input.scratch?.num.fill(0) ?? realArray(input.precision, pw * ph);
  const den = input.scratch?.den.fill(0) ?? realArray(input.precision, pw * ph);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      num[y * pw + x] = weight[i]! * residual[i]!;
      den[y * pw + x] = weight[i]!;
    }
  }
  psf.adjoint(num, num);
  psfSquared.adjoint(den, den);
  const ratio = (input.scratch?.ratio ?? new Float32Array(width * height)).fill(-Infinity);
  let maxDen = 0;
  for (let i = 0; i < den.length; i++) maxDen = Math.max(maxDen, den[i]!);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const d = den[y * pw + x]!;
      if (!(weight[i]! > 0) || !(d > 1e-6 * maxDen)) continue;
      ratio[i] = num[y * pw + x]! / Math.sqrt(d); // F̂/σ_F
    }
  }
  const seeds: Seed[] = [];
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const v = ratio[i]!;
      if (!(v > snr)) continue;
      let isMax = true;
      for (let dy = -1; dy <= 1 && isMax; dy++) {
        const ny = y + dy;
        if (ny < 0 || ny >= height) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const nx = x + dx;
          if ((dx === 0 && dy === 0) || nx < 0 || nx >= width) continue;
          const j = ny * width + nx;
          const w = ratio[j]!;
          if (w > v || (w === v && j < i)) {
            isMax = false;
            break;
          }
        }
      }
      if (isMax) {
        const p = y * pw + x;
        seeds.push({ index: i, flux: num[p]! / den[p]!, snr: num[p]! / Math.sqrt(den[p]!) });
      }
    }
  }
  return seeds;
}
