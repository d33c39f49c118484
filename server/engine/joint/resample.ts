/**
 * Resampling the sky from the common grid onto one image's pixel grid, as a sparse linear operator R with its
 * adjoint Rᵀ, built once from the two pixel ↔ world maps.
 *
 * Every common-grid pixel is carried to the image through world coordinates (common pixel → world → image
 * pixel) and spread over the image pixels it overlaps: it is taken as a square of the same area as its image in
 * the target grid (side √|det J|, J the local Jacobian of the map, from differences over ±½ pixel), centred on
 * its mapped centre, and its value is shared in proportion to the overlap areas. The weights of one common pixel
 * sum to 1 over the image pixels it lands on, so R conserves flux: a point source keeps its summed flux in every
 * image (light that falls outside the image is lost there, as it would be on the sky).
 * When the grids are aligned and the image pixel is a whole number f of common pixels, every square falls
 * inside one image pixel and R is exactly the f × f block sum.
 *
 * An image pixel is "covered" when the common pixels landing on it fill its whole area (coverage ≥ 0.999);
 * only covered pixels can be predicted, so the others are left out of that image's likelihood.
 */

/** Pixel → pixel map between two grids, 0-based coordinates (pixel centres at whole numbers). */
export type PixelMap = (x: number, y: number) => [number, number];

export interface Resampler {
  /** Common grid (source) size. */
  readonly sourceWidth: number;
  readonly sourceHeight: number;
  /** Image grid (target) size. */
  readonly targetWidth: number;
  readonly targetHeight: number;
  /** Fraction of every target pixel's area that source pixels fill (0 … 1). */
  readonly coverage: Float64Array;
  /** Number of stored weights. */
  readonly nonZeros: number;
  /**
   * out (target grid, row-major) = R · source; source is read as a grid with row stride `stride` (the padded
   * width when the common field lives on the padded grid; only its first sourceWidth × sourceHeight corner).
   */
  apply(source: Float64Array, out: Float64Array, stride?: number): void;
  /** out (source corner of a grid with row stride `stride`) = Rᵀ · target; the rest of out is left alone. */
  adjoint(target: Float64Array, out: Float64Array, stride?: number): void;
  /** (index, weight) pairs of one source pixel. */
  weightsOf(sourceIndex: number): { index: number[]; weight: number[] };
}

const DROP = 1e-9;

/** Overlap length of [a0, a1] with [b0, b1]. */
function overlap(a0: number, a1: number, b0: number, b1: number): number {
  return Math.max(0, Math.min(a1, b1) - Math.max(a0, b0));
}

export function buildResampler(
  sourceWidth: number,
  sourceHeight: number,
  targetWidth: number,
  targetHeight: number,
  map: PixelMap,
): Resampler {
  const n = sourceWidth * sourceHeight;
  const start = new Int32Array(n + 1);
  const index: number[] = [];
  const weight: number[] = [];
  const coverage = new Float64Array(targetWidth * targetHeight);
  const cellIndex: number[] = [];
  const cellWeight: number[] = [];
  for (let y = 0; y < sourceHeight; y++) {
    for (let x = 0; x < sourceWidth; x++) {
      const c = y * sourceWidth + x;
      start[c] = index.length;
      const [cx, cy] = map(x, y);
      if (!Number.isFinite(cx) || !Number.isFinite(cy)) continue;
      const [xp0, yp0] = map(x + 0.5, y);
      const [xm0, ym0] = map(x - 0.5, y);
      const [xp1, yp1] = map(x, y + 0.5);
      const [xm1, ym1] = map(x, y - 0.5);
      const det = (xp0 - xm0) * (yp1 - ym1) - (xp1 - xm1) * (yp0 - ym0);
      if (!Number.isFinite(det) || det === 0) continue;
      const half = 0.5 * Math.sqrt(Math.abs(det));
      const area = 4 * half * half;
      const x0 = cx - half;
      const x1 = cx + half;
      const y0 = cy - half;
      const y1 = cy + half;
      const i0 = Math.max(0, Math.floor(x0 + 0.5));
      const i1 = Math.min(targetWidth - 1, Math.floor(x1 + 0.5));
      const j0 = Math.max(0, Math.floor(y0 + 0.5));
      const j1 = Math.min(targetHeight - 1, Math.floor(y1 + 0.5));
      cellIndex.length = 0;
      cellWeight.length = 0;
      let kept = 0;
      for (let j = j0; j <= j1; j++) {
        const oy = overlap(y0, y1, j - 0.5, j + 0.5);
        if (oy <= 0) continue;
        for (let i = i0; i <= i1; i++) {
          const w = (overlap(x0, x1, i - 0.5, i + 0.5) * oy) / area;
          if (w < DROP) continue;
          cellIndex.push(j * targetWidth + i);
          cellWeight.push(w);
          kept += w;
        }
      }
      // Whole squares inside the image: renormalise away the rounding crumbs (|1 − kept| ~ 1e−15).
      const inside = x0 >= -0.5 && x1 <= targetWidth - 0.5 && y0 >= -0.5 && y1 <= targetHeight - 0.5;
      const scale = inside && kept > 0 ? 1 / kept : 1;
      for (let k = 0; k < cellIndex.length; k++) {
        const w = cellWeight[k]! * scale;
        index.push(cellIndex[k]!);
        weight.push(w);
        coverage[cellIndex[k]!] = coverage[cellIndex[k]!]! + w * area;
      }
    }
  }
  start[n] = index.length;
  const idx = Int32Array.from(index);
  const wts = Float64Array.from(weight);
  return {
    sourceWidth,
    sourceHeight,
    targetWidth,
    targetHeight,
    coverage,
    nonZeros: idx.length,
    apply(source, out, stride = sourceWidth) {
      out.fill(0);
      for (let y = 0; y < sourceHeight; y++) {
        for (let x = 0; x < sourceWidth; x++) {
          const c = y * sourceWidth + x;
          const v = source[y * stride + x]!;
          for (let k = start[c]!; k < start[c + 1]!; k++) out[idx[k]!] = out[idx[k]!]! + wts[k]! * v;
        }
      }
    },
    adjoint(target, out, stride = sourceWidth) {
      for (let y = 0; y < sourceHeight; y++) {
        for (let x = 0; x < sourceWidth; x++) {
          const c = y * sourceWidth + x;
          let sum = 0;
          for (let k = start[c]!; k < start[c + 1]!; k++) sum += wts[k]! * target[idx[k]!]!;
          out[y * stride + x] = sum;
        }
      }
    },
    weightsOf(sourceIndex) {
      const i: number[] = [];
      const w: number[] = [];
      for (let k = start[sourceIndex]!; k < start[sourceIndex + 1]!; k++) {
        i.push(idx[k]!);
        w.push(wts[k]!);
      }
      return { index: i, weight: w };
    },
  };
}
