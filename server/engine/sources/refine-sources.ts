/**
 * Refining source candidates by local PSF fits to the data (METHOD-NOTES, "Catalogue accuracy").
 *
 * Model near source k: data ≈ base + F_k · P(x − x_k, y − y_k), with base = background (the PSF-convolved diffuse
 * model, held fixed) + pedestal + the other sources at their current fits, and P the pixel-integrated PSF
 * (psfStamp). Each fit frees (F_k, x_k, y_k) over a window of ±W pixels around the start position and minimises
 *   Gaussian noise: ½ Σ (d − λ)²/σ²,       Poisson noise: Σ (λ − d ln λ)   (λ = base + F P),
 * by Levenberg–Marquardt steps on the Fisher (Gauss–Newton) matrix J^T W J with W = 1/σ² or 1/λ (for Poisson this
 * is Fisher scoring; K. Levenberg 1944, D. Marquardt 1963). Neighbours are held fixed and the sweep repeats, so
 * blended pairs converge together (block coordinate descent).
 *
 * Uncertainties: the inverse Fisher matrix I = Σ J^T W J at the fit (the Laplace approximation of the local
 * likelihood). For sources that share a footprint the Fisher matrix is built jointly over all their parameters
 * and inverted as a whole, so the correlation between blended neighbours widens their errors as it should. For
 * Poisson data W = 1/λ at the fitted λ, which includes the source's own shot noise.
 */
import { addStampToImage, createPsfStamp, psfStamp, type Psf } from '../psf';

export interface RefineImage {
  width: number;
  height: number;
  data: Float64Array | Float32Array;
  /** 1 = pixel used. */
  valid: Uint8Array;
  /** background + pedestal, per pixel. */
  base: Float64Array;
  noise: { kind: 'gaussian'; inverseVariance: Float64Array } | { kind: 'poisson' };
  psf: Psf;
  /** Stamp half-size used for the model (holds nearly all the light). */
  modelHalfSize: number;
  /** Fit-window half-size W. */
  windowHalfSize: number;
}

export interface RefinedSource {
  /** 0-based pixel position. */
  x: number;
  y: number;
  flux: number;
  /** Position of the start guess; the fit may not wander further than `maxShiftPx` from it. */
  seedX: number;
  seedY: number;
  footprint: number;
  /** Position held at the seed (the source was too faint to fit a position). */
  positionFixed: boolean;
}

export interface SourceErrors {
  fluxErr: number;
  xErr: number;
  yErr: number;
  /** Covariance of x and y (pixels²). */
  xyCov: number;
}

/** The sum of all sources' models on the image grid, kept up to date by add/remove. */
export class SourceModel {
  readonly values: Float64Array;
  /** What each source last added (position, flux, stamp), so removing it needs no new stamp. */
  private readonly added = new Map<
    RefinedSource,
    { cx: number; cy: number; flux: number; values: Float64Array }
  >();
  constructor(private readonly image: RefineImage) {
    this.values = new Float64Array(image.width * image.height);
  }
  /** sign 1: values += F · P around the source (and remember it); sign −1: take back what it last added. */
  add(source: RefinedSource, sign: 1 | -1): void {
    const { width, height, psf, modelHalfSize: h } = this.image;
    let record = this.added.get(source);
    if (sign === 1) {
      const cx = Math.round(source.x);
      const cy = Math.round(source.y);
      const values = psfStamp(psf, source.x - cx, source.y - cy, h).values;
      record = { cx, cy, flux: source.flux, values };
      this.added.set(source, record);
    } else {
      if (!record) throw new Error('Source model: removing a source that was never added (a bug)');
      this.added.delete(source);
    }
    addStampToImage(this.values, width, height, record.values, h, record.cx, record.cy, sign * record.flux);
  }
}

interface WindowPixel {
  /** image index */
  k: number;
  /** index into a stamp of half-size windowHalfSize */
  s: number;
}

/** Pixels of the fit window around (cx, cy) that are inside the image and valid. */
function windowPixels(
  image: RefineImage,
  cx: number,
  cy: number,
): { pixels: WindowPixel[]; touchesEdge: boolean; touchesMask: boolean } {
  const { width, height, valid, windowHalfSize: w } = image;
  const size = 2 * w + 1;
  const pixels: WindowPixel[] = [];
  let touchesEdge = false;
  let touchesMask = false;
  for (let j = -w; j <= w; j++) {
    const y = cy + j;
    if (y < 0 || y >= height) {
      touchesEdge = true;
      continue;
    }
    for (let i = -w; i <= w; i++) {
      const x = cx + i;
      if (x < 0 || x >= width) {
        touchesEdge = true;
        continue;
      }
      const k = y * width + x;
      if (!valid[k]) {
        touchesMask = true;
        continue;
      }
      pixels.push({ k, s: (j + w) * size + (i + w) });
    }
  }
  return { pixels, touchesEdge, touchesMask };
}

/** Footprint-window flags for a position. */
export function windowFlags(image: RefineImage, x: number, y: number): { edge: boolean; nearMask: boolean } {
  const r = windowPixels(image, Math.round(x), Math.round(y));
  return { edge: r.touchesEdge, nearMask: r.touchesMask };
}

/** Cholesky factor L (row-major, lower) of a symmetric positive-definite n × n matrix; null if not SPD. */
function cholesky(a: Float64Array, n: number): Float64Array | null {
  const l = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let s = a[i * n + j] as number;
      for (let k = 0; k < j; k++) s -= (l[i * n + k] as number) * (l[j * n + k] as number);
      if (i === j) {
        if (!(s > 0)) return null;
        l[i * n + i] = Math.sqrt(s);
      } else {
        l[i * n + j] = s / (l[j * n + j] as number);
      }
    }
  }
  return l;
}

/** Solves L Lᵀ z = b in place of a copy of b. */
function choleskySolve(l: Float64Array, b: Float64Array, n: number): Float64Array {
  const z = Float64Array.from(b);
  for (let i = 0; i < n; i++) {
    let s = z[i] as number;
    for (let k = 0; k < i; k++) s -= (l[i * n + k] as number) * (z[k] as number);
    z[i] = s / (l[i * n + i] as number);
  }
  for (let i = n - 1; i >= 0; i--) {
    let s = z[i] as number;
    for (let k = i + 1; k < n; k++) s -= (l[k * n + i] as number) * (z[k] as number);
    z[i] = s / (l[i * n + i] as number);
  }
  return z;
}

/** Solves the small dense system A z = b (A symmetric positive definite) by Cholesky; null if not SPD. */
export function solveSymmetric(a: Float64Array, b: Float64Array, n: number): Float64Array | null {
  const l = cholesky(a, n);
  return l ? choleskySolve(l, b, n) : null;
}

/** Inverse of a symmetric positive-definite matrix (one factorisation, n solves); null if not SPD. */
export function invertSymmetric(a: Float64Array, n: number): Float64Array | null {
  const l = cholesky(a, n);
  if (!l) return null;
  const inv = new Float64Array(n * n);
  const e = new Float64Array(n);
  for (let c = 0; c < n; c++) {
    e.fill(0);
    e[c] = 1;
    const col = choleskySolve(l, e, n);
    for (let r = 0; r < n; r++) inv[r * n + c] = col[r] as number;
  }
  return inv;
}

export interface FitOptions {
  /** The fit may not move a source further than this from its seed (pixels); beyond, its position is held. */
  maxShiftPx: number;
  /** Below this flux SNR the position is held at the seed and only the flux is fitted. */
  minSnrForPosition: number;
}

/**
 * Refits one source against data − (base + model of the others). `model` must currently include the source;
 * it is updated to the new fit.
 */
export function refitSource(
  image: RefineImage,
  model: SourceModel,
  source: RefinedSource,
  options: FitOptions,
): void {
  model.add(source, -1);
  const cx = Math.round(source.x);
  const cy = Math.round(source.y);
  const { pixels } = windowPixels(image, cx, cy);
  if (pixels.length === 0) {
    source.flux = 0;
    model.add(source, 1);
    return;
  }
  const { data, base, psf, windowHalfSize: w, noise } = image;
  const poisson = noise.kind === 'poisson';
  const inverseVariance = noise.kind === 'gaussian' ? noise.inverseVariance : null;
  const others = model.values;
  const stamp = createPsfStamp(w);

  // Objective and Fisher system at θ = (F, x, y); nFree = 1 (flux only) or 3.
  const evaluate = (
    flux: number,
    x: number,
    y: number,
    nFree: 1 | 3,
    a: Float64Array | null,
    g: Float64Array | null,
  ): number => {
    psfStamp(psf, x - cx, y - cy, w, stamp);
    if (a) a.fill(0);
    if (g) g.fill(0);
    let objective = 0;
    const jac = [0, 0, 0];
    for (const p of pixels) {
      const P = stamp.values[p.s] as number;
      const b = (base[p.k] as number) + (others[p.k] as number);
      const lambda = b + flux * P;
      const d = data[p.k] as number;
      let w: number;
      let r: number;
      if (poisson) {
        if (!(lambda > 0)) {
          if (d > 0 || lambda < 0) return Infinity;
          continue;
        }
        objective += lambda - (d > 0 ? d * Math.log(lambda) : 0);
        w = 1 / lambda;
        r = d - lambda;
      } else {
        w = inverseVariance![p.k] as number;
        r = d - lambda;
        objective += 0.5 * w * r * r;
      }
      if (!a || !g) continue;
      jac[0] = P;
      if (nFree === 3) {
        jac[1] = flux * (stamp.dValuesDx[p.s] as number);
        jac[2] = flux * (stamp.dValuesDy[p.s] as number);
      }
      for (let u = 0; u < nFree; u++) {
        const ju = jac[u] as number;
        g[u] = (g[u] as number) + w * r * ju;
        for (let v = 0; v <= u; v++)
          a[u * nFree + v] = (a[u * nFree + v] as number) + w * ju * (jac[v] as number);
      }
    }
    if (a)
      for (let u = 0; u < nFree; u++)
        for (let v = 0; v < u; v++) a[v * nFree + u] = a[u * nFree + v] as number;
    return objective;
  };

  const levenberg = (nFree: 1 | 3, theta: number[]): number[] => {
    const a = new Float64Array(nFree * nFree);
    const g = new Float64Array(nFree);
    const damped = new Float64Array(nFree * nFree);
    const aTrial = new Float64Array(nFree * nFree);
    const gTrial = new Float64Array(nFree);
    let mu = 1e-3;
    let current = evaluate(theta[0] as number, theta[1] as number, theta[2] as number, nFree, a, g);
    if (!Number.isFinite(current)) return theta;
    for (let iteration = 0; iteration < 40; iteration++) {
      let accepted = false;
      let converged = false;
      let step: Float64Array | null = null;
      for (let attempt = 0; attempt < 12 && !accepted; attempt++) {
        damped.set(a);
        for (let u = 0; u < nFree; u++)
          damped[u * nFree + u] = (a[u * nFree + u] as number) * (1 + mu) + 1e-300;
        step = solveSymmetric(damped, g, nFree);
        if (!step) {
          mu *= 10;
          continue;
        }
        if (nFree === 3) {
          // at most half a pixel per step
          const s = Math.max(Math.abs(step[1] as number), Math.abs(step[2] as number));
          if (s > 0.5) for (let u = 0; u < 3; u++) step[u] = ((step[u] as number) * 0.5) / s;
        }
        // Predicted decrease of the quadratic model, ≈ ½ gᵀ step: below 1e-6 nats the fit has converged (a
        // further step would only be rejected by rounding).
        let predicted = 0;
        for (let u = 0; u < nFree; u++) predicted += 0.5 * (g[u] as number) * (step[u] as number);
        if (predicted < 1e-6) {
          converged = true;
          break;
        }
        const trial = [
          (theta[0] as number) + (step[0] as number),
          (theta[1] as number) + (nFree === 3 ? (step[1] as number) : 0),
          (theta[2] as number) + (nFree === 3 ? (step[2] as number) : 0),
        ];
        const value = evaluate(
          trial[0] as number,
          trial[1] as number,
          trial[2] as number,
          nFree,
          aTrial,
          gTrial,
        );
        if (value <= current) {
          accepted = true;
          theta = trial;
          current = value;
          a.set(aTrial);
          g.set(gTrial);
          mu = Math.max(mu / 3, 1e-9);
        } else {
          mu *= 4;
        }
      }
      if (converged || !accepted || !step) break;
      const fluxScale = 1 / Math.sqrt(Math.max(a[0] as number, 1e-300));
      const small =
        Math.abs(step[0] as number) < 1e-3 * fluxScale &&
        (nFree === 1 || (Math.abs(step[1] as number) < 1e-4 && Math.abs(step[2] as number) < 1e-4));
      if (small) break;
    }
    return theta;
  };

  // A source fitted with a free position before goes straight to the full fit. Otherwise: flux first at the
  // current position, then flux and position when the source is bright enough.
  const acceptable = (full: number[]): boolean =>
    Math.hypot((full[1] as number) - source.seedX, (full[2] as number) - source.seedY) <=
      options.maxShiftPx &&
    Math.abs((full[1] as number) - cx) <= w &&
    Math.abs((full[2] as number) - cy) <= w;
  // Poisson: start slightly above zero flux so λ > 0 wherever counts were seen, even on a zero background.
  const start = [Math.max(source.flux, poisson ? 1e-3 : 0), source.x, source.y];
  let theta: number[] | null = null;
  if (!source.positionFixed && source.flux > 0) {
    const full = levenberg(3, start);
    if (acceptable(full)) theta = full;
  }
  source.positionFixed = theta === null;
  if (theta === null) {
    theta = levenberg(1, start);
    const fluxOnly = new Float64Array(1);
    evaluate(theta[0] as number, theta[1] as number, theta[2] as number, 1, fluxOnly, new Float64Array(1));
    const snr = (theta[0] as number) * Math.sqrt(fluxOnly[0] as number);
    if (snr >= options.minSnrForPosition) {
      const full = levenberg(3, theta);
      if (acceptable(full)) {
        theta = full;
        source.positionFixed = false;
      }
    }
  }
  source.flux = theta[0] as number;
  source.x = theta[1] as number;
  source.y = theta[2] as number;
  model.add(source, 1);
}

/**
 * Fisher-matrix errors for a group of sources (jointly), evaluated with the full model (base + all sources).
 * Sources whose position is held contribute their flux parameter only.
 */
export function groupErrors(image: RefineImage, model: SourceModel, group: RefinedSource[]): SourceErrors[] {
  const { base, psf, noise, width, height, windowHalfSize: w } = image;
  // parameter layout
  const offsets: number[] = [];
  let n = 0;
  for (const s of group) {
    offsets.push(n);
    n += s.positionFixed ? 1 : 3;
  }
  const fisher = new Float64Array(n * n);
  // Union of windows → per pixel, the list of (param index, derivative).
  const contributions = new Map<number, { index: number; value: number }[]>();
  group.forEach((s, gi) => {
    const cx = Math.round(s.x);
    const cy = Math.round(s.y);
    const stamp = psfStamp(psf, s.x - cx, s.y - cy, w);
    const size = stamp.size;
    const o = offsets[gi] as number;
    for (let j = -w; j <= w; j++) {
      const y = cy + j;
      if (y < 0 || y >= height) continue;
      for (let i = -w; i <= w; i++) {
        const x = cx + i;
        if (x < 0 || x >= width) continue;
        const k = y * width + x;
        if (!image.valid[k]) continue;
        const sIdx = (j + w) * size + (i + w);
        let list = contributions.get(k);
        if (!list) {
          list = [];
          contributions.set(k, list);
        }
        list.push({ index: o, value: stamp.values[sIdx] as number });
        if (!s.positionFixed) {
          list.push({ index: o + 1, value: s.flux * (stamp.dValuesDx[sIdx] as number) });
          list.push({ index: o + 2, value: s.flux * (stamp.dValuesDy[sIdx] as number) });
        }
      }
    }
  });
  for (const [k, list] of contributions) {
    let weight: number;
    if (noise.kind === 'poisson') {
      const lambda = (base[k] as number) + (model.values[k] as number);
      weight = lambda > 0 ? 1 / lambda : 0;
    } else {
      weight = noise.inverseVariance[k] as number;
    }
    for (const p of list) {
      for (const q of list) {
        fisher[p.index * n + q.index] =
          (fisher[p.index * n + q.index] as number) + weight * p.value * q.value;
      }
    }
  }
  const covariance = invertSymmetric(fisher, n);
  return group.map((s, gi) => {
    const o = offsets[gi] as number;
    if (!covariance) return { fluxErr: Infinity, xErr: Infinity, yErr: Infinity, xyCov: 0 };
    const fluxVar = covariance[o * n + o] as number;
    if (s.positionFixed) return { fluxErr: Math.sqrt(fluxVar), xErr: Infinity, yErr: Infinity, xyCov: 0 };
    return {
      fluxErr: Math.sqrt(fluxVar),
      xErr: Math.sqrt(covariance[(o + 1) * n + o + 1] as number),
      yErr: Math.sqrt(covariance[(o + 2) * n + o + 2] as number),
      xyCov: covariance[(o + 1) * n + o + 2] as number,
    };
  });
}

/**
 * Poisson detection significance of one source against the background alone (everything else fixed):
 * the likelihood-ratio statistic TS = 2 [ln L(with the source) − ln L(without)] over its window, reported as
 * sign(F)·√TS. By Wilks' theorem TS is asymptotically χ² with one degree of freedom under the null, so √TS is the
 * Gaussian-equivalent σ (S. S. Wilks, Ann. Math. Stat. 9, 60, 1938; the Poisson likelihood ratio for counts data as
 * in W. Cash, ApJ 228, 939, 1979 — both from memory). Unlike flux/flux_err it does not include the source's own
 * shot noise in the denominator, so bright sources are not made to look weak.
 */
export function poissonSignificance(image: RefineImage, model: SourceModel, source: RefinedSource): number {
  const { data, base, psf, windowHalfSize: w } = image;
  const cx = Math.round(source.x);
  const cy = Math.round(source.y);
  const { pixels } = windowPixels(image, cx, cy);
  const stamp = psfStamp(psf, source.x - cx, source.y - cy, w);
  let ts = 0;
  for (const p of pixels) {
    const with1 = (base[p.k] as number) + (model.values[p.k] as number);
    const without = with1 - source.flux * (stamp.values[p.s] as number);
    const d = data[p.k] as number;
    if (!(with1 > 0)) continue;
    const safeWithout = Math.max(without, 1e-300);
    ts += 2 * ((d > 0 ? d * Math.log(with1 / safeWithout) : 0) - (with1 - safeWithout));
  }
  return Math.sign(source.flux) * Math.sqrt(Math.max(ts, 0));
}
