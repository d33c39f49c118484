/**
 * Resampling the sky from the common grid onto one image's pixel grid, as a sparse linear operator R with its
 * adjoint Rᵀ, built once from the two pixel ↔ world maps.
 *
 * Every common-grid pixel is carried to the image through world coordinates (common pixel → world → image
 * pixel) and spread over the image pixels it overlaps: its footprint on the target grid is the quadrilateral of
 * its four mapped corners, clipped against each target pixel (Sutherland–Hodgman polygon clipping, shoelace
 * areas), and its value is shared in proportion to the overlap areas. Neighbours share their mapped corners, so
 * rotated and offset grids are covered without gaps or double counting (up to the straight edges between corners). The weights of one common pixel
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

/** Clips a polygon (flat x, y list) to one half-plane: keep points with sign·(coordinate − edge) ≤ 0. */
function clipEdge(points: number[], axis: 0 | 1, edge: number, sign: 1 | -1): number[] {
  const out: number[] = [];
  const count = points.length / 2;
  for (let k = 0; k < count; k++) {
    const ax = points[2 * k]!;
    const ay = points[2 * k + 1]!;
    const b = (k + 1) % count;
    const bx = points[2 * b]!;
    const by = points[2 * b + 1]!;
    const da = sign * ((axis === 0 ? ax : ay) - edge);
    const db = sign * ((axis === 0 ? bx : by) - edge);
    if (da <= 0) out.push(ax, ay);
    if ((da < 0 && db > 0) || (da > 0 && db < 0)) {
      const t = da / (da - db);
      out.push(ax + t * (bx - ax), ay + t * (by - ay));
    }
  }
  return out;
}

/** Area of a convex polygon inside the box [x0, x1] × [y0, y1] (Sutherland–Hodgman, then the shoelace formula). */
export function clippedArea(polygon: number[], x0: number, x1: number, y0: number, y1: number): number {
  let p = clipEdge(polygon, 0, x0, -1);
  if (p.length >= 6) p = clipEdge(p, 0, x1, 1);
  if (p.length >= 6) p = clipEdge(p, 1, y0, -1);
  if (p.length >= 6) p = clipEdge(p, 1, y1, 1);
  if (p.length < 6) return 0;
  let twice = 0;
  const count = p.length / 2;
  for (let k = 0; k < count; k++) {
    const b = (k + 1) % count;
    twice += p[2 * k]! * p[2 * b + 1]! - p[2 * b]! * p[2 * k + 1]!;
  }
  return Math.abs(twice) / 2;
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
  // The mapped corners of every source pixel, shared between neighbours: the footprints tile the target exactly.
  const cw = sourceWidth + 1;
  const cornerX = new Float64Array(cw * (sourceHeight + 1));
  const cornerY = new Float64Array(cw * (sourceHeight + 1));
  for (let j = 0; j <= sourceHeight; j++) {
    for (let i = 0; i <= sourceWidth; i++) {
      const [px, py] = map(i - 0.5, j - 0.5);
      cornerX[j * cw + i] = px;
      cornerY[j * cw + i] = py;
    }
  }
  const polygon = new Array<number>(8);
  for (let y = 0; y < sourceHeight; y++) {
    for (let x = 0; x < sourceWidth; x++) {
      const c = y * sourceWidth + x;
      start[c] = index.length;
      const corners = [y * cw + x, y * cw + x + 1, (y + 1) * cw + x + 1, (y + 1) * cw + x];
      let finite = true;
      for (let v = 0; v < 4; v++) {
        polygon[2 * v] = cornerX[corners[v]!]!;
        polygon[2 * v + 1] = cornerY[corners[v]!]!;
        if (!Number.isFinite(polygon[2 * v]!) || !Number.isFinite(polygon[2 * v + 1]!)) finite = false;
      }
      if (!finite) continue;
      let twice = 0;
      for (let v = 0; v < 4; v++) {
        const w = (v + 1) % 4;
        twice += polygon[2 * v]! * polygon[2 * w + 1]! - polygon[2 * w]! * polygon[2 * v + 1]!;
      }
      const area = Math.abs(twice) / 2;
      if (!(area > 0)) continue;
      let x0 = Infinity;
      let x1 = -Infinity;
      let y0 = Infinity;
      let y1 = -Infinity;
      for (let k = 0; k < 8; k += 2) {
        x0 = Math.min(x0, polygon[k]!);
        x1 = Math.max(x1, polygon[k]!);
        y0 = Math.min(y0, polygon[k + 1]!);
        y1 = Math.max(y1, polygon[k + 1]!);
      }
      const i0 = Math.max(0, Math.floor(x0 + 0.5));
      const i1 = Math.min(targetWidth - 1, Math.floor(x1 + 0.5));
      const j0 = Math.max(0, Math.floor(y0 + 0.5));
      const j1 = Math.min(targetHeight - 1, Math.floor(y1 + 0.5));
      cellIndex.length = 0;
      cellWeight.length = 0;
      let kept = 0;
      for (let j = j0; j <= j1; j++) {
        for (let i = i0; i <= i1; i++) {
          const w = clippedArea(polygon, i - 0.5, i + 0.5, j - 0.5, j + 0.5) / area;
          if (w < DROP) continue;
          cellIndex.push(j * targetWidth + i);
          cellWeight.push(w);
          kept += w;
        }
      }
      // Footprints wholly inside the image: renormalise away the rounding crumbs.
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
