/**
 * Pixel-integrated PSF stamps at a sub-pixel offset, with their derivatives with respect to the offset.
 *
 * A stamp of half-size h is a (2h+1) × (2h+1) row-major array; element (j + h)·(2h+1) + (i + h), for i, j in
 * [−h, h], holds the integral of PSF(x − dx, y − dy) over the pixel [i − ½, i + ½] × [j − ½, j + ½]: the share of a
 * unit-flux source centred at (dx, dy) that falls in the pixel at offset (i, j). The PSF integrates to one over
 * the plane, so a stamp sums to one minus the light outside it. Integrating instead of sampling at pixel centres
 * matters: sampled stamps of narrow PSFs leave ring-shaped residuals around bright sources (METHOD-NOTES).
 *
 * Gaussian PSF: the density factorises as N(v; 0, Cvv) · N(u; m v, s²) with m = Cuv/Cvv and s² = det C / Cvv, where
 * v is the axis of larger variance. The integral over u within a pixel is exact (a difference of normal CDFs); the
 * integral over v is composite 5-point Gauss–Legendre (Abramowitz & Stegun 25.4.29), with sub-intervals no wider than
 * min(σv, s). The derivative along u is the same quadrature of the normal density at the pixel edges; the
 * derivative along v is exact: the integrand evaluated at the two pixel edges (Leibniz rule).
 *
 * Axis-aligned Gaussians take an exact separable shortcut (products of 1-D normal interval probabilities).
 *
 * Image PSF: its values are already pixel-integrated, so the stamp is the image shifted by (dx, dy) with the Keys
 * cubic-convolution kernel (a = −½; R. G. Keys, IEEE Trans. ASSP 29, 1153, 1981), which preserves the sum and
 * reproduces quadratics; derivatives are those of the kernel.
 */
import { normalDensity, normalUpperTail, tailAndDensity } from './normal-integral';
import { gaussianCovariance, type GaussianPsf, type ImagePsf, type Psf } from './psf';

export interface PsfStamp {
  halfSize: number;
  /** 2·halfSize + 1. */
  size: number;
  values: Float64Array;
  /** ∂values/∂dx. */
  dValuesDx: Float64Array;
  /** ∂values/∂dy. */
  dValuesDy: Float64Array;
}

/** Makes an empty stamp of the given half-size, for reuse as `out`. */
export function createPsfStamp(halfSize: number): PsfStamp {
  if (!Number.isInteger(halfSize) || halfSize < 0) {
    throw new Error(`PSF stamp half-size must be a whole number ≥ 0 (got ${halfSize})`);
  }
  const size = 2 * halfSize + 1;
  const n = size * size;
  return {
    halfSize,
    size,
    values: new Float64Array(n),
    dValuesDx: new Float64Array(n),
    dValuesDy: new Float64Array(n),
  };
}

// 5-point Gauss–Legendre on [−1, 1] (A&S Table 25.4).
const GL_NODES = [0, -0.5384693101056831, 0.5384693101056831, -0.906179845938664, 0.906179845938664] as const;
const GL_WEIGHTS = [
  0.5688888888888889, 0.47862867049936647, 0.47862867049936647, 0.23692688505618908, 0.23692688505618908,
] as const;

/**
 * Integrated PSF stamp (and derivatives) for a source at sub-pixel offset (dx, dy) from the stamp's central pixel.
 * @param out a stamp from createPsfStamp(halfSize) to fill instead of allocating.
 */
export function psfStamp(psf: Psf, dx: number, dy: number, halfSize: number, out?: PsfStamp): PsfStamp {
  if (!Number.isFinite(dx) || !Number.isFinite(dy)) {
    throw new Error(`PSF stamp offset must be finite (got ${dx}, ${dy})`);
  }
  const stamp = out ?? createPsfStamp(halfSize);
  if (stamp.halfSize !== halfSize) {
    throw new Error(`PSF stamp buffer has half-size ${stamp.halfSize} but ${halfSize} was asked for`);
  }
  if (psf.kind === 'gaussian') gaussianStamp(psf, dx, dy, stamp);
  else imageStamp(psf, dx, dy, stamp);
  return stamp;
}

/** Interval probability of a standard normal from upper tails of |z| (one tail value per edge, no cancellation). */
function intervalFromTails(z0: number, t0: number, z1: number, t1: number): number {
  // t = Q(|z|); lower tail P(Z < z) = t for z < 0.
  if (z0 >= 0) return t0 - t1;
  if (z1 <= 0) return t1 - t0;
  return 1 - t0 - t1;
}

/**
 * Axis-aligned Gaussians (circular, or PA a multiple of 90°) separate exactly: P(i, j) = X(i) Y(j) with X, Y
 * 1-D normal interval probabilities, and ∂P/∂dx = X'(i) Y(j) with X'(i) = [φ(z_lo) − φ(z_hi)]/σx.
 */
function separableGaussianStamp(sx: number, sy: number, dx: number, dy: number, stamp: PsfStamp): void {
  const h = stamp.halfSize;
  const size = stamp.size;
  const profile = (sigma: number, d: number): { value: Float64Array; derivative: Float64Array } => {
    const value = new Float64Array(size);
    const derivative = new Float64Array(size);
    let zPrev = (-h - 0.5 - d) / sigma;
    let tPrev = normalUpperTail(Math.abs(zPrev));
    let fPrev = normalDensity(zPrev);
    for (let k = 0; k < size; k++) {
      const z = (k - h + 0.5 - d) / sigma;
      const t = normalUpperTail(Math.abs(z));
      const f = normalDensity(z);
      value[k] = intervalFromTails(zPrev, tPrev, z, t);
      derivative[k] = (fPrev - f) / sigma;
      zPrev = z;
      tPrev = t;
      fPrev = f;
    }
    return { value, derivative };
  };
  const px = profile(sx, dx);
  const py = profile(sy, dy);
  for (let j = 0; j < size; j++) {
    const vy = py.value[j] as number;
    const dvy = py.derivative[j] as number;
    for (let i = 0; i < size; i++) {
      const k = j * size + i;
      stamp.values[k] = (px.value[i] as number) * vy;
      stamp.dValuesDx[k] = (px.derivative[i] as number) * vy;
      stamp.dValuesDy[k] = (px.value[i] as number) * dvy;
    }
  }
}

function gaussianStamp(psf: GaussianPsf, dx: number, dy: number, stamp: PsfStamp): void {
  const c = gaussianCovariance(psf);
  if (Math.abs(c.xy) <= 1e-14 * (c.xx + c.yy)) {
    separableGaussianStamp(Math.sqrt(c.xx), Math.sqrt(c.yy), dx, dy, stamp);
    return;
  }
  // Outer (quadrature) axis v = the axis of larger variance: smoother integrand.
  const transpose = c.xx > c.yy;
  const cvv = transpose ? c.xx : c.yy;
  const cuu = transpose ? c.yy : c.xx;
  const du = transpose ? dy : dx;
  const dv = transpose ? dx : dy;
  const m = c.xy / cvv;
  const s = Math.sqrt(Math.max(cuu - (c.xy * c.xy) / cvv, 1e-300));
  const sv = Math.sqrt(cvv);
  const h = stamp.halfSize;
  const size = stamp.size;
  const values = stamp.values;
  const dU = transpose ? stamp.dValuesDy : stamp.dValuesDx;
  const dV = transpose ? stamp.dValuesDx : stamp.dValuesDy;
  values.fill(0);
  dU.fill(0);
  // The integrand varies on the scales σv (the outer density) and s/|m|·… ≥ s (the inner edges moving with v).
  const nSub = Math.min(64, Math.max(1, Math.ceil(1 / Math.min(sv, s))));
  const z = new Float64Array(size + 1);
  const t = new Float64Array(size + 1);
  const phi = new Float64Array(size + 1);
  const pair = new Float64Array(2);
  const edgeProfile = new Float64Array((size + 1) * size);
  const index = (vIdx: number, uIdx: number): number => (transpose ? uIdx * size + vIdx : vIdx * size + uIdx);

  // u-profile at a given v: the standardized inner-axis edges z, their tails Q(|z|) and densities φ(z).
  const edges = (v: number): void => {
    const mu = m * v;
    for (let k = 0; k <= size; k++) {
      const zk = (k - h - 0.5 - du - mu) / s;
      z[k] = zk;
      tailAndDensity(zk, pair);
      t[k] = pair[0] as number;
      phi[k] = pair[1] as number;
    }
  };

  for (let row = 0; row < size; row++) {
    const v0 = row - h - 0.5 - dv;
    const width = 1 / nSub;
    for (let sub = 0; sub < nSub; sub++) {
      const centre = v0 + (sub + 0.5) * width;
      for (let q = 0; q < 5; q++) {
        const v = centre + 0.5 * width * (GL_NODES[q] as number);
        const weight = 0.5 * width * (GL_WEIGHTS[q] as number) * (normalDensity(v / sv) / sv);
        edges(v);
        for (let col = 0; col < size; col++) {
          const z0 = z[col] as number;
          const z1 = z[col + 1] as number;
          const k = index(row, col);
          values[k] =
            (values[k] as number) +
            weight * intervalFromTails(z0, t[col] as number, z1, t[col + 1] as number);
          dU[k] = (dU[k] as number) + (weight * ((phi[col] as number) - (phi[col + 1] as number))) / s;
        }
      }
    }
  }
  // Exact v-derivative: ∂/∂dv ∫_{v0−dv}^{v1−dv} F(v) dv = F(v0 − dv) − F(v1 − dv).
  for (let e = 0; e <= size; e++) {
    const v = e - h - 0.5 - dv;
    const density = normalDensity(v / sv) / sv;
    edges(v);
    for (let col = 0; col < size; col++) {
      edgeProfile[e * size + col] =
        density *
        intervalFromTails(z[col] as number, t[col] as number, z[col + 1] as number, t[col + 1] as number);
    }
  }
  for (let row = 0; row < size; row++) {
    for (let col = 0; col < size; col++) {
      dV[index(row, col)] =
        (edgeProfile[row * size + col] as number) - (edgeProfile[(row + 1) * size + col] as number);
    }
  }
}

/** Keys cubic-convolution kernel (a = −½) and its derivative. */
function keys(t: number): number {
  const a = Math.abs(t);
  if (a < 1) return (1.5 * a - 2.5) * a * a + 1;
  if (a < 2) return ((-0.5 * a + 2.5) * a - 4) * a + 2;
  return 0;
}
function keysDerivative(t: number): number {
  const a = Math.abs(t);
  const sign = t < 0 ? -1 : 1;
  if (a < 1) return sign * (4.5 * a - 5) * a;
  if (a < 2) return sign * ((-1.5 * a + 5) * a - 4);
  return 0;
}

function imageStamp(psf: ImagePsf, dx: number, dy: number, stamp: PsfStamp): void {
  const { width, height, data, centreX, centreY } = psf;
  const h = stamp.halfSize;
  const size = stamp.size;
  stamp.values.fill(0);
  stamp.dValuesDx.fill(0);
  stamp.dValuesDy.fill(0);
  const wx = new Float64Array(4);
  const wdx = new Float64Array(4);
  const wy = new Float64Array(4);
  const wdy = new Float64Array(4);
  for (let j = -h; j <= h; j++) {
    const Y = centreY + j - dy;
    const y0 = Math.floor(Y) - 1;
    for (let q = 0; q < 4; q++) {
      wy[q] = keys(Y - (y0 + q));
      wdy[q] = -keysDerivative(Y - (y0 + q));
    }
    for (let i = -h; i <= h; i++) {
      const X = centreX + i - dx;
      const x0 = Math.floor(X) - 1;
      for (let p = 0; p < 4; p++) {
        wx[p] = keys(X - (x0 + p));
        wdx[p] = -keysDerivative(X - (x0 + p));
      }
      let v = 0;
      let vdx = 0;
      let vdy = 0;
      for (let q = 0; q < 4; q++) {
        const yy = y0 + q;
        if (yy < 0 || yy >= height) continue;
        for (let p = 0; p < 4; p++) {
          const xx = x0 + p;
          if (xx < 0 || xx >= width) continue;
          const d = data[yy * width + xx] as number;
          v += d * (wx[p] as number) * (wy[q] as number);
          vdx += d * (wdx[p] as number) * (wy[q] as number);
          vdy += d * (wx[p] as number) * (wdy[q] as number);
        }
      }
      const k = (j + h) * size + (i + h);
      stamp.values[k] = v;
      stamp.dValuesDx[k] = vdx;
      stamp.dValuesDy[k] = vdy;
    }
  }
}

/** A half-size that holds all but ~1e-9 of a PSF's light (Gaussian: 6.5 σ of the major axis, plus a pixel). */
export function psfStampHalfSize(psf: Psf): number {
  if (psf.kind === 'gaussian') return Math.ceil((6.5 * psf.fwhmMajorPx) / (2 * Math.sqrt(2 * Math.LN2))) + 1;
  return Math.max(psf.centreX, psf.width - 1 - psf.centreX, psf.centreY, psf.height - 1 - psf.centreY) + 2;
}
