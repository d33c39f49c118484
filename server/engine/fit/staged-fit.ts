/**
 * The staged MAP fit of the separation model (model.ts), following the measured facts in METHOD-NOTES:
 *
 * 1. Diffuse only, with the spectrum tapered at PSF scales (P_k · exp(−(k/kc)²)), compact pixels held "off"
 *    (u = q/α). METHOD-NOTES suggests kc ≈ 1/(2·FWHM); on the acceptance skies kc = 1/(3·FWHM) let fewer faint
 *    sources be swallowed before seeding (SNR 7–10 completeness 86% → 97% on one test sky) without seeding
 *    diffuse structure as points, so that is used. Two passes, the spectrum re-estimated in between.
 * 2. The field is re-expressed for the full (untapered) spectrum: ξ_k ← φ̂_k / A_k.
 * 3. `seedRounds` rounds of: seed compact pixels at matched-filter maxima of the residual above `seedSnr`
 *    (seed-points.ts), fit diffuse and compact jointly, re-estimate the spectrum (critical filter, spectrum.ts)
 *    and re-express ξ. A final joint fit follows the last update.
 *    Every spectrum update uses the modes with k ≤ kc/2 (scales above ~6 FWHM, where the taper is weak and point
 *    sources carry little power) and the power law extrapolates to smaller scales: fitted over all k the slope
 *    was pulled shallow by unseeded sources (γ → 2, and the diffuse then took faint sources), and fitted up to
 *    kc it was pulled steep by the taper.
 * Every fit is L-BFGS (optimise/lbfgs.ts) on preconditioned variables, an exact change of variables
 * x = x0 + D ⊙ y per stage with the diagonal estimates (METHOD-NOTES)
 *   diffuse modes: D_k = 1/√(1 + P_k |K_k|² κ), κ = Σ_valid s² w / N;   mean level: D_μ = 1/√(1 + Σ_valid s² w);
 *   compact pixels: D = 1/√(1 + u² Σ K² w + q/u);
 * stopping when the objective falls by less than `absoluteDecrease` nats per iteration (3 in a row), or when
 * over `changeWindow` iterations the model image and K ⊛ u moved by less than `changeTolerance` σ RMS. The
 * second test is the one that ends most stages: the objective keeps falling slowly along directions that hardly
 * change the prediction (the shape of u inside a source, fixed only by the prior), and the catalogue refits each
 * source anyway (sources/extract-sources.ts). When it was introduced it halved the evaluations on the acceptance
 * skies with the same completeness, bias and pulls, and on the 512² bench sky it ended the fit after 187 instead
 * of 745 evaluations with the same diffuse error and sources. A peak test (the largest change at any pixel) kept
 * stages running for hundreds of iterations on slow trades of flux at the brightest sources.
 * The early stages only prepare the next one: each gets a third of `maxIterations` and 10× (diffuse) or 5×
 * (joint rounds) the decrease tolerance and 5× the change tolerance; the final stage gets the full budget and
 * tolerances. Stage 1 runs on the image binned 2 × 2 when that is sound (`coarseStart`, binnedInput).
 * Every stage frees only the diffuse modes the data can move (`modeFloor`) and the compact pixels near an "on"
 * one (`activeRadius`); the others keep their values (SeparationModel.fixCompact).
 * Deterministic: no randomness anywhere; the same input and settings give the same numbers.
 */
import { createConvolver, goodFftSize, realArray, type Convolver, type RealArray } from '../fft';
import { LbfgsWorkspace, minimiseLbfgs } from '../optimise/lbfgs';
import { psfFwhmPx, psfKernelOnGrid, type Psf } from '../psf';
import { medianInPlace } from '../noise/median';
import { SeparationModel, type StageBlocks } from './model';
import { matchedFilterSeeds } from './seed-points';
import {
  binnedPower,
  fitPowerLaw,
  modeWavenumbers,
  type ModeGrid,
  powerLawSpectrum,
  type BinnedPower,
  type SpectrumParameters,
} from './spectrum';

export interface FitProgress {
  stage: string;
  iteration: number;
  objective: number;
  gradNorm: number;
  evaluations: number;
}

export interface FitInput {
  width: number;
  height: number;
  data: Float64Array;
  /** 1 = pixel enters the likelihood */
  valid: Uint8Array;
  noise: { kind: 'gaussian'; sigma: number | Float64Array } | { kind: 'poisson' };
  psf: Psf;
}

export interface FitOptions {
  /** Inverse-gamma shape α. @default 1.5 */
  alpha?: number;
  /** Inverse-gamma scale q in units of the single-source flux error σ_F. @default 0.05 */
  qRelative?: number;
  /** Diffuse spectrum: amplitude and slope estimated from the data unless fixed here. */
  spectrum?: { amplitude?: number | null; slope?: number | null; estimate?: boolean };
  /** @default 2 */
  seedRounds?: number;
  /** Matched-filter SNR for seeding compact pixels. @default 3 */
  seedSnr?: number;
  /** Iterations per stage. @default 300 */
  maxIterations?: number;
  /** Stop a stage when the objective falls by less than this per iteration (nats). @default 0.01 */
  absoluteDecrease?: number;
  /**
   * Stop a stage when, over the last `changeWindow` iterations, the model image K ⊛ (s + u) and the compact
   * component K ⊛ u moved by less than this many σ, RMS over the valid pixels (σ = 1/√w, the likelihood
   * curvature; per pixel the larger of the two changes). @default 0.01
   */
  changeTolerance?: number;
  /** Iterations between the checks of `changeTolerance`. @default 10 */
  changeWindow?: number;
  /**
   * The joint stages free only the compact pixels within this many pixels (a square) of one that is on (above
   * twice the off level); the rest stay off. @default ⌈1.5 · FWHM⌉
   */
  activeRadius?: number;
  /**
   * A stage frees only the diffuse modes whose data curvature P_k |K_k|² κ (κ = Σ s² w / N) is at least this
   * fraction of their prior curvature (1); the others (scales the PSF has smoothed away, 99.9% prior) keep their
   * values. At 1e-3 about 12% of the padded grid's modes are free on the bench sky (29% at 1e-6), with the
   * same catalogue and diffuse error on the acceptance skies. @default 1e-3
   */
  modeFloor?: number;
  /** Range allowed for the fitted slope γ. @default [2, 6] */
  slopeRange?: [number, number];
  /**
   * FFT arithmetic of the objective's transforms in every stage. 'float32' is about twice as fast per transform
   * (fft/index.ts) and moved the final objective by ~0.01 nats and the catalogue not at all on the bench skies.
   * @default 'float32'
   */
  precision?: 'float32' | 'float64';
  /**
   * Run the diffuse-only first stage on a 2 × 2 binned copy of the image (a quarter of the cost per evaluation)
   * when the PSF is a Gaussian still at least 1.2 binned pixels wide and the binned image is at least 32 × 32;
   * the fine fit starts from its field. @default true
   */
  coarseStart?: boolean;
  /** Internal: stop after the diffuse-only stage (the coarse start's own fit). */
  diffuseOnly?: boolean;
  onProgress?: (p: FitProgress) => void;
  signal?: AbortSignal;
}

export interface FitResult {
  width: number;
  height: number;
  paddedWidth: number;
  paddedHeight: number;
  // The planes are float32, as they are written (FITS float32) and as the float32 fit computed them: half the
  // memory of float64 at the end of a fit, when they exist next to the catalogue's working arrays.
  /** s on the image grid */
  diffuseSky: Float32Array;
  /** K ⊛ s on the image grid */
  diffuse: Float32Array;
  /** u on the image grid */
  compactSky: Float32Array;
  /** K ⊛ u on the image grid */
  compact: Float32Array;
  model: Float32Array;
  /** the "off" level q/α of u */
  pedestal: number;
  alpha: number;
  q: number;
  /** single-source flux error σ_F used to scale q */
  fluxErrorScale: number;
  spectrum: SpectrumParameters & { estimated: boolean; binned: BinnedPower };
  iterations: number;
  /** Objective evaluations on the full-resolution grid. */
  evaluations: number;
  /** The coarse start's evaluations and padded grid (about a quarter of the pixels); null without one. */
  coarse: { evaluations: number; paddedWidth: number; paddedHeight: number } | null;
  objective: number;
  converged: boolean;
  trace: { stage: string; iteration: number; objective: number; gradNorm: number }[];
  seedsPerRound: number[];
  /** φ = μ + H(A ⊙ ξ) on the padded grid at the end; only for a diffuseOnly fit (the coarse start). */
  logDiffusePadded: Float64Array | null;
}

/** Padded grid side: room for the diffuse field beyond the edge (≥ 20% of the side, and ≥ 4 FWHM + 8 px). */
export function paddedSize(side: number, fwhmMajor: number): number {
  return goodFftSize(side + Math.max(Math.ceil(0.2 * side), Math.ceil(4 * fwhmMajor) + 8));
}

/** out[a] = base[j] + d[o + j]·y[o + j] for a = free[j]: the change of variables on the free modes or pixels
 *  (base holds the stage's start values of the free entries only). */
function scatterShift(
  out: Float64Array,
  base: Float64Array,
  d: Float64Array,
  y: Float64Array,
  o: number,
  free: Int32Array,
): void {
  for (let j = 0; j < free.length; j++) {
    const a = free[j]!;
    out[a] = base[j]! + d[o + j]! * y[o + j]!;
  }
}

/** log v for each v, as a new float64 array. */
function logOf(values: RealArray): Float64Array {
  const out = new Float64Array(values.length);
  for (let i = 0; i < values.length; i++) out[i] = Math.log(values[i]!);
  return out;
}

/** out[j] = values[free[j]] for each j (none when free is null). (A loop: TypedArray.from with a map function
 *  first lists the values as JS numbers, which at 4096² took ~10× the time and several times the memory.) */
function gatherAt(values: Float64Array, free: Int32Array | null, out: Float64Array): Float64Array {
  if (free) for (let j = 0; j < free.length; j++) out[j] = values[free[j]!]!;
  return out;
}

/** g[o + j] = d[o + j]·grad[free[j]]: the gradient in the preconditioned variables. */
function gatherScaled(g: Float64Array, d: Float64Array, grad: RealArray, o: number, free: Int32Array): void {
  for (let j = 0; j < free.length; j++) g[o + j] = d[o + j]! * grad[free[j]!]!;
}

/**
 * Image pixels within `radius` (a square of side 2·radius + 1) of a compact pixel that is on (u above twice the
 * off level q/α), in increasing order.
 */
export function activeCompactPixels(
  tau: Float64Array,
  pedestal: number,
  radius: number,
  width: number,
  height: number,
): Int32Array {
  const onLevel = Math.log(2 * pedestal);
  const on = new Uint8Array(width * height);
  for (let i = 0; i < on.length; i++) on[i] = tau[i]! > onLevel ? 1 : 0;
  // separable dilation of the square: along rows, then along columns
  const rows = new Uint8Array(on.length);
  for (let y = 0; y < height; y++) dilateLine(on, rows, y * width, 1, width, radius);
  const both = new Uint8Array(on.length);
  for (let x = 0; x < width; x++) dilateLine(rows, both, x, width, height, radius);
  let count = 0;
  for (const v of both) count += v;
  const list = new Int32Array(count);
  for (let i = 0, j = 0; i < both.length; i++) if (both[i]) list[j++] = i;
  return list;
}

/** out[k] = 1 on the line (start, stride, length) where an input 1 lies within `radius` positions. */
function dilateLine(
  input: Uint8Array,
  out: Uint8Array,
  start: number,
  stride: number,
  length: number,
  radius: number,
): void {
  let last = -Infinity;
  for (let k = 0; k < length; k++) {
    if (input[start + k * stride]) last = k;
    if (k - last <= radius) out[start + k * stride] = 1;
  }
  let next = Infinity;
  for (let k = length - 1; k >= 0; k--) {
    if (input[start + k * stride]) next = k;
    if (next - k <= radius) out[start + k * stride] = 1;
  }
}

/** Indices of the modes with P_k |K_k|² κ ≥ floor, in increasing order. */
export function freeModes(
  power: ModeGrid,
  transferPower: ModeGrid,
  kappa: number,
  floor: number,
): Int32Array {
  let count = 0;
  for (let i = 0; i < power.length; i++) if (power[i]! * transferPower[i]! * kappa >= floor) count++;
  const out = new Int32Array(count);
  for (let i = 0, j = 0; i < power.length; i++)
    if (power[i]! * transferPower[i]! * kappa >= floor) out[j++] = i;
  return out;
}

/**
 * RMS over valid pixels of √w·max(|model − lastModel|, |compact − lastCompact|) (padded-grid model and compact,
 * image-grid last copies), then last ← current.
 */
function rmsChange(
  modelPadded: RealArray,
  compactPadded: RealArray,
  lastModel: Float32Array,
  lastCompact: Float32Array,
  weight: Float64Array,
  width: number,
  height: number,
  pw: number,
): number {
  let sumSq = 0;
  let count = 0;
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const mv = modelPadded[y * pw + x]!;
      const cv = compactPadded[y * pw + x]!;
      if (weight[i]! > 0) {
        const change = Math.max(Math.abs(mv - lastModel[i]!), Math.abs(cv - lastCompact[i]!));
        sumSq += change * change * weight[i]!;
        count++;
      }
      lastModel[i] = mv;
      lastCompact[i] = cv;
    }
  }
  return count > 0 ? Math.sqrt(sumSq / count) : 0;
}

/**
 * The image binned 2 × 2 for the coarse start: sums of four pixels (a block is valid when all four are), the
 * noise of the sum (σ² added; Poisson stays Poisson), the PSF at half the width in pixels (the Gaussian is
 * integrated over the larger pixels by psfKernelOnGrid). Null when the start would not help or not be sound.
 */
export function binnedInput(input: FitInput): FitInput | null {
  const { width, height, data, valid, psf, noise } = input;
  if (psf.kind !== 'gaussian' || psf.fwhmMinorPx / 2 < 1.2) return null;
  const wc = Math.floor(width / 2);
  const hc = Math.floor(height / 2);
  if (wc < 32 || hc < 32) return null;
  const dataC = new Float64Array(wc * hc);
  const validC = new Uint8Array(wc * hc);
  const sigmaC =
    noise.kind === 'gaussian' && typeof noise.sigma !== 'number' ? new Float64Array(wc * hc) : null;
  let validCount = 0;
  for (let yc = 0; yc < hc; yc++) {
    for (let xc = 0; xc < wc; xc++) {
      let sum = 0;
      let variance = 0;
      let ok = true;
      for (let dy = 0; dy < 2; dy++) {
        for (let dx = 0; dx < 2; dx++) {
          const i = (2 * yc + dy) * width + 2 * xc + dx;
          if (!valid[i]) ok = false;
          sum += data[i]!;
          if (sigmaC) variance += (noise as { sigma: Float64Array }).sigma[i]! ** 2;
        }
      }
      const j = yc * wc + xc;
      validC[j] = ok ? 1 : 0;
      dataC[j] = ok ? sum : 0;
      if (sigmaC) sigmaC[j] = ok ? Math.sqrt(variance) : 0;
      if (ok) validCount++;
    }
  }
  if (validCount < 0.25 * wc * hc) return null;
  return {
    width: wc,
    height: hc,
    data: dataC,
    valid: validC,
    noise:
      noise.kind === 'poisson' ? noise : { kind: 'gaussian', sigma: sigmaC ?? 2 * (noise.sigma as number) },
    psf: { ...psf, fwhmMajorPx: psf.fwhmMajorPx / 2, fwhmMinorPx: psf.fwhmMinorPx / 2 },
  };
}

/** P(k) of the power law (spectrum.ts) at one wavenumber. */
function powerAt(p: SpectrumParameters, k: number): number {
  return p.amplitude * Math.pow(k * k + p.turnover * p.turnover, -p.slope / 2);
}

/**
 * Brings the coarse start's φ up to this grid: φ(x, y) = φ_coarse((x − ½)/2, (y − ½)/2) − ln 4 (bilinear,
 * periodic; a coarse pixel holds the sum of four), then ξ = A·ĥ/(A² + floor) with ĥ = H(φ − μ) (a Wiener
 * filter, so modes the coarse stage could not represent stay near 0). Writes ξ, returns μ (the mean of φ).
 */
function upsampledStart(
  coarse: FitResult,
  xi: Float64Array,
  grid: {
    pw: number;
    ph: number;
    hartley: (input: RealArray, output: RealArray) => void;
    /** two padded grids of the transform's type to work in (SeparationModel.scratchGrids) */
    scratch: [RealArray, RealArray];
    amplitude: ModeGrid;
    floor: number;
  },
): number {
  const { pw, ph } = grid;
  const cw = coarse.paddedWidth;
  const chh = coarse.paddedHeight;
  const phiC = coarse.logDiffusePadded!;
  const [phi, hat] = grid.scratch;
  const ln4 = Math.log(4);
  let mean = 0;
  for (let y = 0; y < ph; y++) {
    const fy = (y - 0.5) / 2;
    const y0 = Math.floor(fy);
    const ty = fy - y0;
    const ya = ((y0 % chh) + chh) % chh;
    const yb = (ya + 1) % chh;
    for (let x = 0; x < pw; x++) {
      const fx = (x - 0.5) / 2;
      const x0 = Math.floor(fx);
      const tx = fx - x0;
      const xa = ((x0 % cw) + cw) % cw;
      const xb = (xa + 1) % cw;
      const v =
        (1 - ty) * ((1 - tx) * phiC[ya * cw + xa]! + tx * phiC[ya * cw + xb]!) +
        ty * ((1 - tx) * phiC[yb * cw + xa]! + tx * phiC[yb * cw + xb]!) -
        ln4;
      phi[y * pw + x] = v;
      mean += v;
    }
  }
  mean /= pw * ph;
  for (let i = 0; i < phi.length; i++) phi[i] = phi[i]! - mean;
  grid.hartley(phi, hat);
  wienerFilter(grid.amplitude, hat, grid.floor, xi);
  return mean;
}

// The passes over whole grids live in small functions of their own (below and above): V8 does not optimise a
// function as large as stagedFit, and its loops ran several times slower in place (measured at 256², one run
// each on a busy machine: the start before the first stage took 113 ms in place, 32 ms in these functions).

/** The box means of the start: the data averaged over valid pixels of (2r+1)² boxes, above the pedestal and
 *  floored. */
interface BoxStart {
  data: Float64Array;
  valid: Uint8Array;
  width: number;
  height: number;
  r: number;
  pedestal: number;
  floor: number;
}

/** Variance of log(box mean − pedestal, floored) over boxes centred every r pixels. */
function boxLogVariance(b: BoxStart): number {
  const { data, valid, width, height, r } = b;
  let sum = 0;
  let sum2 = 0;
  let count = 0;
  for (let y = 0; y < height; y += r) {
    for (let x = 0; x < width; x += r) {
      let s = 0;
      let c = 0;
      for (let yy = Math.max(0, y - r); yy <= Math.min(height - 1, y + r); yy++) {
        for (let xx = Math.max(0, x - r); xx <= Math.min(width - 1, x + r); xx++) {
          if (valid[yy * width + xx]) {
            s += data[yy * width + xx]!;
            c++;
          }
        }
      }
      if (c > 0) {
        const v = Math.log(Math.max(s / c - b.pedestal, b.floor));
        sum += v;
        sum2 += v * v;
        count++;
      }
    }
  }
  const meanLog = sum / count;
  return Math.max(sum2 / count - meanLog * meanLog, 0);
}

/** out[y·pw + x] = log(box mean − pedestal, floored) − mu at every pixel with valid ones in its box, 0 elsewhere
 *  (out zeroed on entry; separable box sums). */
function boxSmoothedLog(b: BoxStart, mu: number, out: RealArray, pw: number): RealArray {
  const { data, valid, width, height, r } = b;
  // (float32: the start needs a few digits, counts below 2²⁴ are exact, and at 4096² the two float64 maps were
  // 0.27 GB)
  const rowSum = new Float32Array(width * height);
  const rowCount = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      let sum = 0;
      let c = 0;
      for (let xx = Math.max(0, x - r); xx <= Math.min(width - 1, x + r); xx++) {
        const i = y * width + xx;
        if (valid[i]) {
          sum += data[i]!;
          c++;
        }
      }
      rowSum[y * width + x] = sum;
      rowCount[y * width + x] = c;
    }
  }
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      let sum = 0;
      let c = 0;
      for (let yy = Math.max(0, y - r); yy <= Math.min(height - 1, y + r); yy++) {
        sum += rowSum[yy * width + x]!;
        c += rowCount[yy * width + x]!;
      }
      if (c > 0) out[y * pw + x] = Math.log(Math.max(sum / c - b.pedestal, b.floor)) - mu;
    }
  }
  return out;
}

/** ξ_k = A_k ĥ_k / (A_k² + ν), 0 where A_k = 0: the Wiener filter for white noise of per-mode variance ν. */
function wienerFilter(amplitude: ModeGrid, hat: RealArray, nu: number, xi: Float64Array): void {
  for (let i = 0; i < xi.length; i++) {
    const a = amplitude[i]!;
    xi[i] = a > 0 ? (a * hat[i]!) / (a * a + nu) : 0;
  }
}

/** ξ = φ̂ / A where A > 0, 0 elsewhere. */
function divideByAmplitude(phiHat: RealArray, amplitude: ModeGrid, xi: Float64Array): void {
  for (let i = 0; i < xi.length; i++) xi[i] = amplitude[i]! > 0 ? phiHat[i]! / amplitude[i]! : 0;
}

/** Σ s² w over the image part of a padded grid: the data's total curvature of the diffuse mean. */
function weightedSquares(
  s: RealArray,
  weight: Float64Array,
  width: number,
  height: number,
  pw: number,
): number {
  let sw = 0;
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) sw += s[y * pw + x]! ** 2 * weight[y * width + x]!;
  }
  return sw;
}

/** d − model at the valid pixels of the image part of a padded model, 0 at the others, into out. */
function imageResidual(
  data: Float64Array,
  valid: Uint8Array,
  modelPadded: RealArray,
  width: number,
  height: number,
  pw: number,
  out: Float32Array,
): Float32Array {
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      out[i] = valid[i] ? data[i]! - modelPadded[y * pw + x]! : 0;
    }
  }
  return out;
}

/** 1/σ² at the valid pixels with a usable σ (positive, finite), 0 at the others. */
function inverseVarianceOf(sigma: number | Float64Array, valid: Uint8Array): Float64Array {
  const out = new Float64Array(valid.length);
  for (let i = 0; i < out.length; i++) {
    const si = typeof sigma === 'number' ? sigma : sigma[i]!;
    if (valid[i] && si > 0 && Number.isFinite(si)) out[i] = 1 / (si * si);
  }
  return out;
}

/** Mean of the values at the valid pixels. */
function meanWhere(values: Float64Array, valid: Uint8Array): number {
  let sum = 0;
  let count = 0;
  for (let i = 0; i < values.length; i++) {
    if (valid[i]) {
      sum += values[i]!;
      count++;
    }
  }
  return sum / count;
}

/** out = a − b. */
function difference(a: Float32Array, b: Float32Array, out: Float32Array): Float32Array {
  for (let i = 0; i < out.length; i++) out[i] = a[i]! - b[i]!;
  return out;
}

function meanOf(values: ModeGrid): number {
  let sum = 0;
  for (let i = 0; i < values.length; i++) sum += values[i]!;
  return sum / values.length;
}

/** Median of values[i] over the i with keep(i) (NaN when there are none). */
function medianWhere(values: ArrayLike<number>, keep: (i: number) => boolean): number {
  // Into a typed array for the quickselect of noise/median.ts: at 4096² a JS array of the image's values took
  // about 0.2 GiB and stayed reachable from the caller's frame for the whole fit.
  let count = 0;
  for (let i = 0; i < values.length; i++) if (keep(i)) count++;
  if (count === 0) return NaN;
  const a = new Float64Array(count);
  for (let i = 0, j = 0; i < values.length; i++) if (keep(i)) a[j++] = values[i]!;
  return medianInPlace(a);
}

export function stagedFit(input: FitInput, options: FitOptions = {}): FitResult {
  const { width, height, data, valid, psf } = input;
  const alpha = options.alpha ?? 1.5;
  const qRelative = options.qRelative ?? 0.05;
  const seedRounds = options.seedRounds ?? 2;
  const seedSnr = options.seedSnr ?? 3;
  const maxIterations = options.maxIterations ?? 300;
  const absoluteDecrease = options.absoluteDecrease ?? 0.01;
  const changeTolerance = options.changeTolerance ?? 0.01;
  const changeWindow = options.changeWindow ?? 10;
  const [slopeMin, slopeMax] = options.slopeRange ?? [2, 6];
  const estimateSpectrum = options.spectrum?.estimate ?? true;
  const signal = options.signal;
  const precision = options.precision ?? 'float32';

  const fwhm = psfFwhmPx(psf);
  const pw = paddedSize(width, fwhm.major);
  const ph = paddedSize(height, fwhm.major);
  // The padded kernel is handed to the model and not kept here (the model's transforms hold its spectrum).
  let kernel: Float64Array | null = psfKernelOnGrid(psf, pw, ph);
  let sumK2 = 0;
  for (const v of kernel) sumK2 += v * v;

  // Noise weights and the single-source flux error σ_F = σ/√ΣK² (Gaussian) or √(mean counts)/√ΣK² (Poisson).
  const m = width * height;
  let inverseVariance: Float64Array | undefined;
  let sigmaTypical: number;
  if (input.noise.kind === 'gaussian') {
    const sigma = input.noise.sigma;
    inverseVariance = inverseVarianceOf(sigma, valid);
    sigmaTypical = typeof sigma === 'number' ? sigma : medianWhere(sigma, (i) => inverseVariance![i]! > 0);
  } else {
    sigmaTypical = Math.sqrt(Math.max(meanWhere(data, valid), 0.01));
  }
  const fluxErrorScale = sigmaTypical / Math.sqrt(sumK2);
  const q = qRelative * fluxErrorScale;
  const pedestal = q / alpha;

  const model = new SeparationModel({
    width,
    height,
    paddedWidth: pw,
    paddedHeight: ph,
    data,
    valid,
    noise: input.noise.kind === 'gaussian' ? { kind: 'gaussian', inverseVariance } : { kind: 'poisson' },
    kernel,
    alpha,
    q,
    precision,
  });
  // Dropped for the collector: a long-running frame keeps dead locals reachable, lint cannot see that.
  // eslint-disable-next-line no-useless-assignment
  kernel = null;
  /** K² ⊛ for the matched filter of a seeding round, built for the round and disposed after it. */
  const psfSquaredConvolver = (grid: RealArray): Convolver => {
    const squared = psfKernelOnGrid(psf, pw, ph, grid);
    for (let i = 0; i < squared.length; i++) squared[i] = squared[i]! * squared[i]!;
    return createConvolver(pw, ph, squared, { fft: model.fft });
  };
  const n = model.n;
  const k = modeWavenumbers(pw, ph);
  const kc = 1 / (3 * fwhm.major);
  const activeRadius = options.activeRadius ?? Math.ceil(1.5 * fwhm.major);
  const modeFloor = options.modeFloor ?? 1e-3;
  const turnover = 1 / Math.max(pw, ph);
  const power = new Float32Array(n);

  try {
    // Data-driven start: μ from the median level above the pedestal; the spectrum amplitude from the variance of
    // the log of a lightly smoothed, floored copy of the data; slope 3 (a common starting value).
    const level = Math.max(medianWhere(data, (i) => valid[i] !== 0) - pedestal, 0.1 * sigmaTypical);
    let mu = Math.log(level);
    const box = {
      data,
      valid,
      width,
      height,
      r: Math.max(1, Math.round(fwhm.major)),
      pedestal,
      floor: Math.max(0.3 * sigmaTypical, 0.1 * level),
    };
    let spectrum: SpectrumParameters = { amplitude: 1, slope: options.spectrum?.slope ?? 3, turnover };
    const xi = model.newCoefficients();
    const tau = new Float64Array(m).fill(Math.log(pedestal));
    let evaluations = 0;
    let iterations = 0;
    let objective = 0;
    let converged = false;
    const trace: FitResult['trace'] = [];
    const seedsPerRound: number[] = [];
    // The likelihood curvature per pixel (SeparationModel.curvature): for Gaussian noise it is 1/σ² at valid
    // pixels and 0 at masked ones, which inverseVariance already holds, so that array is shared.
    const weight = inverseVariance ?? new Float64Array(m);
    let binned: BinnedPower = { k: [], power: [], mapPower: [], modes: [], information: [] };

    const setSpectrum = (taper: number | null): void => {
      powerLawSpectrum(k, spectrum, taper, power);
      model.setSpectrum(power);
    };

    /** The start without the coarse stage: the spectrum's amplitude from the data, then the tapered spectrum
     *  set and ξ from the data. */
    const startFromData = (): void => {
      // amplitude so that the mean of P_k over the modes (the pointwise variance of φ) is the measured variance
      spectrum.amplitude =
        options.spectrum?.amplitude ??
        Math.max(boxLogVariance(box), 0.01) / meanOf(powerLawSpectrum(k, spectrum, null, power));
      setSpectrum(kc);
      // ξ: a Wiener-filtered log of the box-smoothed data, so the first stage begins near the large scales of
      // the answer: ξ_k = A_k ĥ_k / (A_k² + ν), ĥ = H(φ0 − μ), ν the per-mode variance of the noise in φ0
      // (σ/((2r+1)·level))² for a (2r+1)² box (the standard Wiener filter for white noise). In the model's
      // grids: nothing has been evaluated yet.
      const [phi0, hat] = model.scratchGrids();
      model.hartleyTransform(boxSmoothedLog(box, mu, phi0.fill(0), pw), hat);
      wienerFilter(model.amplitude, hat, (sigmaTypical / ((2 * box.r + 1) * level)) ** 2, xi);
    };

    // The change test of `changeTolerance`: the model image and K ⊛ u at the last check, on the image grid.
    // (float32: the test resolves 0.01 σ on values of tens of σ, far above float32 rounding)
    const lastModel = new Float32Array(m);
    const lastCompact = new Float32Array(m);
    /** RMS change (in σ) of the model image or K ⊛ u over the valid pixels since the last call, which stores the
     *  current ones. The model is that of the last evaluation (in L-BFGS, the accepted point). */
    const changeSinceLastCheck = (): number => {
      const compactPadded = model.convolvedCompact(tau);
      return rmsChange(model.modelPadded, compactPadded, lastModel, lastCompact, weight, width, height, pw);
    };

    let gXi: RealArray | null = null;
    let gTau: RealArray | null = null;
    // the optimiser's vectors, and the stages' own (scaling, start values, start point), kept from stage to
    // stage (optimise/lbfgs.ts LbfgsWorkspace) and dropped before the components are made
    const lbfgsWorkspace = new LbfgsWorkspace();
    const stageVectors = new LbfgsWorkspace();
    const runStage = (
      stage: string,
      blocks: StageBlocks,
      tolerance: number,
      stageIterations: number,
      stageChangeTolerance: number,
    ): void => {
      // preconditioner from the current state
      model.evaluate(xi, mu, tau, blocks, null, null);
      model.curvature(weight);
      changeSinceLastCheck();
      const sw = weightedSquares(model.s, weight, width, height, pw);
      const kappa = sw / n;
      // Only the diffuse modes the data can move are free: P_k |K_k|² κ ≥ modeFloor (the data's curvature of
      // the mode relative to its prior's; below it the mode stays at its prior-dominated value, and the L-BFGS
      // vectors get shorter).
      const modes = blocks.diffuse ? freeModes(power, model.transferPower, kappa, modeFloor) : null;
      const nModes = modes ? modes.length : 0;
      const nDiffuse = modes ? nModes + 1 : 0;
      // Only the compact pixels near an "on" one are free (METHOD-NOTES: an off pixel has no gradient to turn
      // on with, so the others would only make every L-BFGS vector longer).
      const active = blocks.compact ? activeCompactPixels(tau, pedestal, activeRadius, width, height) : null;
      const nCompact = active ? active.length : 0;
      const d = stageVectors.float64(0, nDiffuse + nCompact);

      if (modes) {
        for (let j = 0; j < nModes; j++) {
          const i = modes[j]!;
          d[j] = 1 / Math.sqrt(1 + power[i]! * model.transferPower[i]! * kappa);
        }
        d[nModes] = 1 / Math.sqrt(1 + sw);
      }
      if (active) {
        for (let j = 0; j < nCompact; j++) {
          const i = active[j]!;
          const u = Math.exp(model.clipTau(tau[i]!));
          d[nDiffuse + j] = 1 / Math.sqrt(1 + u * u * sumK2 * weight[i]! + q / u);
        }
      }
      const xi0 = gatherAt(xi, modes, stageVectors.float64(1, nModes));
      const mu0 = mu;
      const tau0 = gatherAt(tau, active, stageVectors.float64(2, nCompact));
      model.fixCompact(tau, active ?? new Int32Array(0));
      // (allocated once for all stages: a padded float64 grid left to the collector per stage measurably raised
      // the peak; both are float32 with the float32 objective, which computes them from float32 transforms)
      const gradXi = blocks.diffuse ? (gXi ??= model.newGrid()) : null;
      const gradTau = blocks.compact ? (gTau ??= realArray(model.precision, m)) : null;
      const unpack = (y: Float64Array): void => {
        if (modes) {
          scatterShift(xi, xi0, d, y, 0, modes);
          mu = mu0 + d[nModes]! * y[nModes]!;
        }
        if (active) scatterShift(tau, tau0, d, y, nDiffuse, active);
      };
      const result = minimiseLbfgs(
        (y, g) => {
          unpack(y);
          const [f, gMu] = model.evaluate(xi, mu, tau, blocks, gradXi, gradTau);
          if (modes && gradXi) {
            gatherScaled(g, d, gradXi, 0, modes);
            g[nModes] = d[nModes]! * gMu;
          }
          if (active && gradTau) gatherScaled(g, d, gradTau, nDiffuse, active);
          return f;
        },
        stageVectors.float64(3, d.length).fill(0),
        {
          maxIterations: stageIterations,
          maxEvaluations: 3 * stageIterations,
          absoluteDecrease: tolerance,
          stallIterations: 3,
          gradientTolerance: 1e-6,
          signal,
          workspace: lbfgsWorkspace,
          stopWhen: (p) => p.iteration % changeWindow === 0 && changeSinceLastCheck() < stageChangeTolerance,
          onProgress: (p) => {
            const entry = {
              stage,
              iteration: iterations + p.iteration,
              objective: p.objective,
              gradNorm: p.gradNorm,
            };
            trace.push(entry);
            options.onProgress?.({ ...entry, evaluations: evaluations + p.evaluations });
          },
        },
      );
      unpack(result.x);
      model.fixCompact(tau, null);
      iterations += result.iterations;
      evaluations += result.evaluations;
      objective = result.f;
      converged = result.converged;
    };

    /** Critical-filter update of (a, γ) from modes up to kMax; ξ re-expressed for the new spectrum. */
    const updateSpectrum = (kMax: number, taperAfter: number | null): void => {
      model.evaluate(xi, mu, tau, { diffuse: false, compact: false }, null, null);
      model.curvature(weight);
      const sw = weightedSquares(model.s, weight, width, height, pw);
      // (in the model's workspace, in its precision: ξ re-expressed below carries float32 rounding, far below
      // the float32 objective's own)
      const phiHat = model.phiHatInWorkspace(xi);
      binned = binnedPower(k, phiHat, power, model.transferPower, sw / n, kMax);
      if (estimateSpectrum && binned.k.length >= 2) {
        const fitted = fitPowerLaw(binned, turnover, slopeMin, slopeMax);
        spectrum = {
          amplitude: options.spectrum?.amplitude ?? fitted.amplitude,
          slope: options.spectrum?.slope ?? fitted.slope,
          turnover,
        };
        if (options.spectrum?.slope != null && options.spectrum?.amplitude == null) {
          // slope fixed by the user: refit the amplitude alone
          let sx = 0;
          let sww = 0;
          for (let b = 0; b < binned.k.length; b++) {
            const kb = binned.k[b]!;
            sx +=
              binned.information[b]! *
              (Math.log(binned.power[b]!) + (spectrum.slope / 2) * Math.log(kb * kb + turnover ** 2));
            sww += binned.information[b]!;
          }
          spectrum.amplitude = Math.exp(sx / sww);
        }
      }
      setSpectrum(taperAfter);
      divideByAmplitude(phiHat, model.amplitude, xi);
    };

    // Stage 1: diffuse only, tapered spectrum.
    // The early stages only prepare the start of the next one: looser tolerances and shorter budgets.
    const early = Math.max(1, Math.round(maxIterations / 3));
    // (not with a user-fixed amplitude: that is per mode of this grid)
    const coarseInput =
      options.coarseStart === false || options.diffuseOnly || options.spectrum?.amplitude != null
        ? null
        : binnedInput(input);
    let coarseSummary: FitResult['coarse'] = null;
    if (coarseInput) {
      // Stage 1 on the 2 × 2 binned image, then its field brought up to this grid.
      const coarse = stagedFit(coarseInput, {
        ...options,
        diffuseOnly: true,
        onProgress: options.onProgress
          ? (p) => options.onProgress?.({ ...p, stage: `${p.stage}-coarse` })
          : undefined,
      });
      coarseSummary = {
        evaluations: coarse.evaluations,
        paddedWidth: coarse.paddedWidth,
        paddedHeight: coarse.paddedHeight,
      };
      iterations += coarse.iterations;
      for (const t of coarse.trace) trace.push({ ...t, stage: `${t.stage}-coarse` });
      // per-mode power at the same physical wavenumber is 4× larger on this grid, and k in cycles per pixel is
      // half as large: a = a_coarse · 4 / 2^γ (spectrum.ts: P = a (k² + k0²)^(−γ/2))
      spectrum = {
        amplitude: (coarse.spectrum.amplitude * 4) / 2 ** coarse.spectrum.slope,
        slope: coarse.spectrum.slope,
        turnover,
      };
      setSpectrum(kc);
      mu = upsampledStart(coarse, xi, {
        pw,
        ph,
        hartley: (a, b) => model.hartleyTransform(a, b),
        scratch: model.scratchGrids().slice(0, 2) as [RealArray, RealArray],
        amplitude: model.amplitude,
        // Wiener floor: the tapered power at 1.5 kc, so scales the coarse stage did not fit stay near 0
        floor: powerAt(spectrum, 1.5 * kc) * Math.exp(-(1.5 ** 2)),
      });
    } else {
      startFromData();
      runStage(
        'diffuse',
        { diffuse: true, compact: false },
        10 * absoluteDecrease,
        early,
        5 * changeTolerance,
      );
      updateSpectrum(kc / 2, kc);
      runStage(
        'diffuse',
        { diffuse: true, compact: false },
        10 * absoluteDecrease,
        early,
        5 * changeTolerance,
      );
    }
    // Stage 2: full spectrum.
    if (!options.diffuseOnly) updateSpectrum(kc / 2, null);
    for (let round = 1; round <= (options.diffuseOnly ? 0 : seedRounds); round++) {
      model.evaluate(xi, mu, tau, { diffuse: false, compact: false }, null, null);
      model.curvature(weight);
      // The round works in the model's padded grids and the change test's image arrays, all rewritten before
      // they are read again (runStage starts with an evaluation and a change check): at 4096² its maps and the
      // K² kernel were about 0.55 GB per round left to the collector, whose timing then set the peak.
      const residual = imageResidual(data, valid, model.modelPadded, width, height, pw, lastModel);
      const [num, den, kernelGrid] = model.scratchGrids();
      const psfSquared = psfSquaredConvolver(kernelGrid);
      let seeds: ReturnType<typeof matchedFilterSeeds>;
      try {
        seeds = matchedFilterSeeds({
          width,
          height,
          pw,
          ph,
          residual,
          weight,
          psf: model.psf,
          psfSquared,
          precision: model.precision,
          scratch: { num, den, ratio: lastCompact },
          snr: seedSnr,
        });
      } finally {
        psfSquared.dispose();
      }
      seedsPerRound.push(seeds.length);
      for (const seed of seeds) {
        const u = Math.exp(model.clipTau(tau[seed.index]!));
        tau[seed.index] = model.clipTau(Math.log(u + seed.flux));
      }
      runStage(
        `joint-${round}`,
        { diffuse: true, compact: true },
        5 * absoluteDecrease,
        early,
        5 * changeTolerance,
      );
      updateSpectrum(kc / 2, null);
    }
    if (!options.diffuseOnly) {
      runStage('final', { diffuse: true, compact: true }, absoluteDecrease, maxIterations, changeTolerance);
    }
    // The stages' vectors go to the collector before the components are made (at 4096² about 0.5 GB).
    lbfgsWorkspace.release();
    stageVectors.release();
    gXi = null;
    gTau = null;

    model.evaluate(xi, mu, tau, { diffuse: false, compact: false }, null, null);
    // final binned power of the MAP field for the diagnostic plot
    model.curvature(weight);
    const sw = weightedSquares(model.s, weight, width, height, pw);
    binned = binnedPower(k, model.phiHatInWorkspace(xi), power, model.transferPower, sw / n, 0.5);
    // Components on the image grid. The model image and K ⊛ u go into the change test's arrays, which the fit
    // no longer needs (at 4096² each image-sized float32 array is 67 MB).
    const crop = (padded: RealArray, out = new Float32Array(m)): Float32Array => {
      for (let y = 0; y < height; y++) out.set(padded.subarray(y * pw, y * pw + width), y * width);
      return out;
    };
    const diffuseSky = crop(model.s);
    const modelImage = crop(model.modelPadded, lastModel);
    const diffuse = crop(model.convolvedDiffuse());
    const compactSky = model.compactSky(tau);
    const compact = difference(modelImage, diffuse, lastCompact);

    return {
      width,
      height,
      paddedWidth: pw,
      paddedHeight: ph,
      diffuseSky,
      diffuse,
      compactSky,
      compact,
      model: modelImage,
      pedestal,
      alpha,
      q,
      fluxErrorScale,
      spectrum: { ...spectrum, estimated: estimateSpectrum, binned },
      iterations,
      evaluations: model.evaluations,
      coarse: coarseSummary,
      objective,
      converged,
      trace,
      seedsPerRound,
      logDiffusePadded: options.diffuseOnly ? logOf(model.s) : null,
    };
  } finally {
    model.dispose();
  }
}
