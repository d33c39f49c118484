/**
 * The MAP objective of the separation model and its analytic gradient.
 *
 *   image = K ⊛ (s + u) + noise,   s = exp(φ),  φ = μ + H(A ⊙ ξ),  u = exp(τ)
 *
 * - K: the PSF as a unit-sum kernel on the padded grid (Pw × Ph, periodic); the image occupies the corner
 *   [0, W) × [0, H) of that grid, so the diffuse field continues beyond every edge into the padding instead of
 *   wrapping round onto the opposite side of the image.
 * - ξ (Pw·Ph values): white, prior −log p = ½ Σ ξ²; A = √P_k (spectrum.ts); H the orthonormal Hartley transform.
 * - μ: mean log level, flat prior.
 * - τ (W·H values, image pixels only): u = exp(τ) has an inverse-gamma(α, q) prior, density
 *   p(u) = q^α/Γ(α) u^(−α−1) e^(−q/u); with u = e^τ the Jacobian du/dτ = u gives
 *   p(τ) = q^α/Γ(α) e^(−ατ) e^(−q e^(−τ)),  so −log p(τ) = α τ + q e^(−τ) + const (checked against @stdlib's
 *   invgamma logpdf in the tests). Its minimum is at u = q/α: the "off" level of a pixel. τ is clipped to
 *   [τmin, τmax] inside the objective (zero gradient beyond), which replaces box bounds.
 * - Likelihood over valid (unmasked) pixels, m = model:
 *     Gaussian: ½ Σ w (m − d)²,  w = 1/σ² (scalar or per pixel);
 *     Poisson:  Σ (λ − d log λ), λ = m + ε (a tiny floor) — masked pixels are left out of both sums.
 *
 * Gradient (adjoint pass): r = ∂L/∂m on valid pixels (0 elsewhere, padding included), g_t = Kᵀ ⋆ r on the padded
 * grid; ∂/∂φ = g_t ⊙ s; ∂/∂ξ = A ⊙ H(g_t ⊙ s) + ξ; ∂/∂μ = Σ g_t ⊙ s; ∂/∂τ = g_t ⊙ u + α − q e^(−τ).
 * One evaluation: Hartley (1 real FFT), K ⊛ (2), Kᵀ ⋆ (2), Hartley (1): three forward + inverse FFT pairs (in
 * float32 the fused paths of fft/types.ts, cheaper than three pairs), plus four passes over the padded grid and
 * one over the image, on four padded arrays (s, modelPadded, work, uPadded); u and its prior only at the free
 * compact pixels (fixCompact), since a stage frees only those near sources.
 */
import {
  createConvolver,
  createHartley2d,
  createRealFft2d,
  type Convolver,
  type Hartley2d,
  type FftPrecision,
  type RealArray,
  type RealFft2d,
  realArray,
  supportsFloat32,
} from '../fft';
import { expArray, shiftExpAdd } from '../math/exp-array';
import { KernelArena } from '../simd/kernels';
import type { ModeGrid } from './spectrum';

export interface NoiseModel {
  kind: 'gaussian' | 'poisson';
  /** Gaussian only: 1/σ² per image pixel (0 where masked). */
  inverseVariance?: Float64Array;
}

export interface ModelSetup {
  width: number;
  height: number;
  paddedWidth: number;
  paddedHeight: number;
  /** Data on the image grid (row-major W·H). */
  data: Float64Array;
  /** 1 = pixel enters the likelihood. */
  valid: Uint8Array;
  noise: NoiseModel;
  /** PSF kernel on the padded grid, centred at (0, 0), unit sum. */
  kernel: Float64Array;
  alpha: number;
  q: number;
  /**
   * Arithmetic of the objective's transforms (the Hartley transform and the PSF convolution and its adjoint):
   * 'float32' (PFFFT, fused paths, fft/types.ts; objective moved by ~1e−3 nats, fft/index.ts) or 'float64'.
   * Falls back to float64 on grids PFFFT does not take (SeparationModel.precision says which is in use).
   * @default 'float64'
   */
  precision?: FftPrecision;
}

/** Which blocks of parameters a stage frees. */
export interface StageBlocks {
  diffuse: boolean;
  compact: boolean;
}

export class SeparationModel {
  readonly width: number;
  readonly height: number;
  readonly pw: number;
  readonly ph: number;
  /** padded pixel count */
  readonly n: number;
  /** image pixel count */
  readonly m: number;
  /** The setup without its kernel (the transforms hold the kernel's spectrum; the padded array is not kept). */
  readonly setup: Omit<ModelSetup, 'kernel'>;
  /** A_k = √P_k on the padded grid (set by setSpectrum; float32, spectrum.ts ModeGrid). */
  readonly amplitude: Float32Array;
  /** |K_k|² of every Hartley mode (equal for ±k), float32. */
  readonly transferPower: Float32Array;
  tauMin: number;
  tauMax: number;
  /** Poisson floor ε. */
  readonly floor: number;
  evaluations = 0;

  /** The one real FFT of the padded grid: the Hartley transform, the PSF convolver and the fit's other
   *  convolvers (staged-fit.ts) all run on it (one scratch spectrum, one worker if any). */
  readonly fft: RealFft2d;
  /** The arithmetic of fft (setup.precision, or float64 where float32 does not take the grid). */
  readonly precision: FftPrecision;
  private readonly convolver: Convolver;
  private readonly hartley: Hartley2d;
  /** u = exp(clip τ) on the padded grid (0 in the padding): of the last evaluation at the free pixels, of the
   *  last fixCompact call at the others. */
  private readonly uPadded: RealArray;
  /** fixCompact's mask of the free pixels, kept between calls. */
  private freeMask: Uint8Array | null = null;
  /** uPadded was lent out as scratch (scratchGrids): zeroed before its next use. */
  private uDirty = false;
  /** Free compact pixels (image-grid indices) after fixCompact; null = every pixel is recomputed. */
  private active: Int32Array | null = null;
  /** Σ (α τ + q e^(−τ)) over the pixels fixCompact held fixed. */
  private priorFixed = 0;
  // Padded-grid workspaces: four arrays in all (with uPadded), each reused through the evaluation (evaluate).
  /** s = exp φ of the last evaluation (the exponent clamped to |φ| ≤ 700, or φ − μ to [−87, 88] with the
   *  SIMD kernels: beyond either, float32 holds 0 or ∞ anyway). */
  readonly s: RealArray;
  /** K ⊛ (s + u) of the last evaluation. */
  readonly modelPadded: RealArray;
  /** φ̂, then ∂L/∂m, Kᵀ ⋆ ∂L/∂m and its product with s, in turn. */
  private readonly work: RealArray;
  /**
   * With the float32 transforms: the WASM memory that holds s, modelPadded, work, uPadded, the amplitudes and
   * one coefficient vector ξ (newCoefficients), so that the objective's element-wise passes run as SIMD kernels
   * (simd/kernels.ts); null with float64 or where WASM SIMD is missing (plain loops, same arithmetic but exp).
   */
  private readonly arena: KernelArena | null;
  private coefficientsTaken = false;

  constructor(setup: ModelSetup) {
    const { kernel, ...rest } = setup;
    this.setup = rest;
    this.width = setup.width;
    this.height = setup.height;
    this.pw = setup.paddedWidth;
    this.ph = setup.paddedHeight;
    this.n = this.pw * this.ph;
    this.m = this.width * this.height;
    // |K|² computed in float64 on a transform of its own (released at once), before the fit's arrays exist.
    this.transferPower = kernelTransferPower(kernel, this.pw, this.ph);
    this.precision =
      setup.precision === 'float32' && supportsFloat32(this.pw, this.ph) ? 'float32' : 'float64';
    this.fft = createRealFft2d(this.pw, this.ph, { precision: this.precision });
    this.convolver = createConvolver(this.pw, this.ph, kernel, { fft: this.fft });
    this.hartley = createHartley2d(this.pw, this.ph, { fft: this.fft });
    const n = this.n;
    this.arena =
      this.precision === 'float32'
        ? KernelArena.create(KernelArena.bytesFor(...Array(5).fill(4 * n), 8 * n))
        : null;
    const arena = this.arena;
    this.amplitude = arena ? arena.float32(n) : new Float32Array(n);
    // float32 workspaces with the float32 transforms (their fused paths read and write them directly, and the
    // transforms round to float32 anyway): half the memory, and no conversion passes.
    const grid = (): RealArray => (arena ? arena.float32(n) : this.newGrid());
    this.uPadded = grid();
    this.s = grid();
    this.modelPadded = grid();
    this.work = grid();
    let maxAbs = 0;
    let sum = 0;
    let count = 0;
    for (let i = 0; i < this.m; i++) {
      if (!setup.valid[i]) continue;
      maxAbs = Math.max(maxAbs, Math.abs(setup.data[i]!));
      sum += setup.data[i]!;
      count++;
    }
    this.floor = 1e-8 * Math.max(1, count > 0 ? sum / count : 1);
    const off = Math.log(setup.q / setup.alpha);
    this.tauMin = off - 30;
    this.tauMax = Math.log(Math.max(maxAbs, setup.q) * 1e4 + setup.q);
  }

  dispose(): void {
    this.convolver.dispose();
    this.hartley.dispose();
    this.fft.dispose();
  }

  setSpectrum(power: ModeGrid): void {
    for (let i = 0; i < this.n; i++) this.amplitude[i] = Math.sqrt(power[i]!);
  }

  /** The orthonormal Hartley transform on the padded grid (its own inverse). */
  hartleyTransform(input: RealArray, output: RealArray): void {
    this.hartley.transform(input, output);
  }

  /** φ̂ = A ⊙ ξ: the Hartley coefficients of φ − μ. */
  phiHat<T extends RealArray>(xi: Float64Array, out: T): T {
    for (let i = 0; i < this.n; i++) out[i] = this.amplitude[i]! * xi[i]!;
    return out;
  }

  /**
   * A zeroed vector for the coefficients ξ (n values): the first one lives in the model's kernel memory, where
   * evaluate runs its SIMD passes on it; any other ξ works too, with plain loops.
   */
  newCoefficients(): Float64Array {
    if (this.arena && !this.coefficientsTaken) {
      this.coefficientsTaken = true;
      return this.arena.float64(this.n);
    }
    return new Float64Array(this.n);
  }

  /** A new zeroed padded-grid array of the type the model's transforms take without conversion. */
  newGrid(): RealArray {
    return realArray(this.precision, this.n);
  }

  /**
   * The model's four padded workspaces as scratch for a pass between evaluations (seeding, the start): their
   * contents are lost, s, modelPadded and the compact field of the last evaluation with them, so the model's
   * next use must be an evaluate. Only while no compact pixels are held (fixCompact(…, null)), since the held
   * pixels' u lives in one of them.
   */
  scratchGrids(): [RealArray, RealArray, RealArray, RealArray] {
    if (this.active !== null)
      throw new Error('SeparationModel: no scratch grids while compact pixels are held');
    // u is 0 in the padding, and evaluate only rewrites the image part: cleared again at the next use
    this.uDirty = true;
    return [this.work, this.uPadded, this.modelPadded, this.s];
  }

  /** φ̂ = A ⊙ ξ in the model's workspace (valid until the next evaluate or workspace call). */
  phiHatInWorkspace(xi: Float64Array): RealArray {
    return this.phiHat(xi, this.work);
  }

  /** s = exp(μ + H(A ⊙ ξ)) into this.s. */
  diffuseField(xi: Float64Array, mu: number): RealArray {
    this.phiHat(xi, this.work);
    this.hartley.transform(this.work, this.s, 0);
    expArray(this.s, mu, this.s);
    return this.s;
  }

  /**
   * Holds the compact pixels outside `active` at their values in `tau` for the evaluations that follow, so that
   * an evaluation computes u, its prior and its gradient only at the active pixels (a stage that frees a few
   * percent of them, staged-fit.ts); gTau is then written only there. `active` = null frees every pixel again.
   * Call it again whenever τ changes outside the active pixels.
   */
  fixCompact(tau: Float64Array, active: Int32Array | null): void {
    const { width, height, pw } = this;
    const { alpha, q } = this.setup;
    this.cleanU();
    const free = (this.freeMask ??= new Uint8Array(this.m)).fill(0);
    if (active) for (const i of active) free[i] = 1;
    let prior = 0;
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const i = y * width + x;
        const t = this.clipTau(tau[i]!);
        const u = Math.exp(t);
        this.uPadded[y * pw + x] = u;
        if (active && !free[i]) prior += alpha * t + q / u;
      }
    }
    this.active = active;
    this.priorFixed = active ? prior : 0;
  }

  /** Zeroes uPadded after it was lent out as scratch (its padding must be 0). */
  private cleanU(): void {
    if (!this.uDirty) return;
    this.uPadded.fill(0);
    this.uDirty = false;
  }

  clipTau(t: number): number {
    return t < this.tauMin ? this.tauMin : t > this.tauMax ? this.tauMax : t;
  }

  /**
   * K ⊛ u for u = exp(clip τ) on the image (0 in the padding), on the padded grid, in the model's workspace: valid
   * until the next evaluate or convolvedCompact call (the fit's change test reads it at once).
   */
  convolvedCompact(tau: Float64Array): RealArray {
    const { width, height, pw, work } = this;
    work.fill(0);
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) work[y * pw + x] = Math.exp(this.clipTau(tau[y * width + x]!));
    }
    this.convolver.apply(work, work);
    return work;
  }

  /** u = exp(clip τ) on the image grid, float32. */
  compactSky(tau: Float64Array): Float32Array {
    const out = new Float32Array(this.m);
    for (let i = 0; i < this.m; i++) out[i] = Math.exp(this.clipTau(tau[i]!));
    return out;
  }

  /** K ⊛ s of the last evaluation, in the model's workspace (valid until the next evaluate or workspace call). */
  convolvedDiffuse(): RealArray {
    this.work.set(this.s);
    this.convolver.apply(this.work, this.work);
    return this.work;
  }

  /** The PSF convolution of the objective (K ⊛ and Kᵀ ⋆ on the padded grid), for the fit's other passes. */
  get psf(): Convolver {
    return this.convolver;
  }

  /** K ⊛ v for a padded-grid field (out may equal v). */
  convolve(v: RealArray, out: RealArray): void {
    this.convolver.apply(v, out);
  }

  /**
   * Objective and gradient. gXi (n), gTau (m) and the returned gMu are written only for the free blocks;
   * returns [objective, ∂/∂μ].
   */
  evaluate(
    xi: Float64Array,
    mu: number,
    tau: Float64Array,
    blocks: StageBlocks,
    gXi: RealArray | null,
    gTau: RealArray | null,
  ): [number, number] {
    this.evaluations++;
    const { width, height, pw } = this;
    const { data, valid, noise, alpha, q } = this.setup;
    const uPadded = this.uPadded;
    const active = this.active;
    this.cleanU();
    // compact: u at the free pixels (all of them unless fixCompact chose some) and its prior
    let prior = this.priorFixed;
    if (active) {
      prior += compactAt(active, tau, uPadded, width, pw, this.tauMin, this.tauMax, alpha, q);
    } else {
      for (let y = 0; y < height; y++) {
        for (let x = 0; x < width; x++) {
          const t = this.clipTau(tau[y * width + x]!);
          const u = Math.exp(t);
          uPadded[y * pw + x] = u;
          prior += alpha * t + q / u;
        }
      }
    }
    // diffuse: φ̂ = A ⊙ ξ (with ½ Σ ξ²), φ = μ + H φ̂, s = exp φ, total = s + u
    // (Fourier coefficients, residuals and gradients have no pedestal: their transforms take none out, shift 0;
    // total's mean comes from shiftExpAdd.)
    const s = this.s;
    const model = this.modelPadded;
    const work = this.work;
    // the SIMD kernels when ξ and the grids are in the kernel memory (float32 grids, s = e^(φ−μ)·f32(e^μ))
    const arena = this.arena?.holds(xi) ? this.arena : null;
    prior += arena
      ? arena.amplitudeTimes(this.amplitude, xi, work as Float32Array)
      : phiHatAndHalfSquares(this.amplitude, xi, work);
    this.hartley.transform(work, s, 0); // s = φ − μ for now
    const total = arena
      ? arena.expScaleAdd(
          s as Float32Array,
          Math.fround(Math.exp(mu)),
          uPadded as Float32Array,
          model as Float32Array,
        )
      : shiftExpAdd(s, mu, s, uPadded, model);
    const totalMean = total / this.n; // s = exp φ, model = s + u
    this.convolver.apply(model, model, totalMean);
    // likelihood and its derivative r in the model, on the padded grid (0 outside valid image pixels)
    const r = work;
    const like =
      noise.kind === 'gaussian'
        ? gaussianTerm(model, data, valid, noise.inverseVariance!, r, width, height, pw)
        : poissonTerm(model, data, valid, this.floor, r, width, height, pw);
    zeroOutsideImage(r, width, height, pw);
    const f = like + prior;
    if (!gXi && !gTau) return [f, 0];
    // adjoint: g_t = Kᵀ ⋆ r, in place
    const gt = work;
    this.convolver.adjoint(r, gt, 0);
    let gMu = 0;
    if (gTau) {
      if (active && blocks.compact) {
        compactGradientAt(active, tau, gt, uPadded, gTau, width, pw, this.tauMin, this.tauMax, alpha, q);
      } else if (active) {
        for (const i of active) gTau[i] = 0;
      } else {
        for (let y = 0; y < height; y++) {
          for (let x = 0; x < width; x++) {
            const i = y * width + x;
            gTau[i] = this.tauGradient(tau[i]!, gt[y * pw + x]!, uPadded[y * pw + x]!, blocks.compact);
          }
        }
      }
    }
    if (gXi && blocks.diffuse && arena) {
      // in the kernel memory throughout (the fused Hartley transform reads its input before it writes)
      const product = work as Float32Array;
      gMu = arena.productSum(gt as Float32Array, s as Float32Array, product);
      this.hartley.transform(product, product, 0);
      arena.amplitudeGradient(this.amplitude, product, xi);
      gXi.set(product);
    } else if (gXi && blocks.diffuse) {
      const product = work;
      gMu = productInto(gt, s, product);
      this.hartley.transform(product, gXi, 0);
      amplitudeGradient(this.amplitude, gXi, xi);
    } else if (gXi) {
      gXi.fill(0);
    }
    return [f, gMu];
  }

  /** ∂f/∂τ of one pixel: gt·u + α − q/u inside the clip range (u = e^τ there), 0 outside or when not free. */
  private tauGradient(raw: number, gt: number, u: number, free: boolean): number {
    if (!free || raw < this.tauMin || raw > this.tauMax) return 0;
    const { alpha, q } = this.setup;
    return gt * u + alpha - q / u;
  }

  /**
   * Likelihood curvature per image pixel in the model (w = 1/σ², or 1/λ for Poisson at the current model),
   * 0 where masked. Uses this.modelPadded from the last evaluation for Poisson.
   */
  curvature(out: Float64Array): Float64Array {
    const { width, height, pw } = this;
    const { valid, noise } = this.setup;
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const i = y * width + x;
        if (!valid[i]) out[i] = 0;
        else if (noise.kind === 'gaussian') out[i] = noise.inverseVariance![i]!;
        else out[i] = 1 / (Math.max(this.modelPadded[y * pw + x]!, 0) + Math.max(this.floor, 0.5));
      }
    }
    return out;
  }
}

/** ½ Σ w (m − d)² over valid pixels; r = w (m − d) there and 0 at masked ones (padded grid). */
function gaussianTerm(
  model: RealArray,
  data: Float64Array,
  valid: Uint8Array,
  w: Float64Array,
  r: RealArray,
  width: number,
  height: number,
  pw: number,
): number {
  let like = 0;
  for (let y = 0; y < height; y++) {
    const row = y * width;
    const prow = y * pw;
    for (let x = 0; x < width; x++) {
      const i = row + x;
      if (valid[i] === 0) {
        r[prow + x] = 0;
        continue;
      }
      const wi = w[i]!;
      const diff = model[prow + x]! - data[i]!;
      like += 0.5 * wi * diff * diff;
      r[prow + x] = wi * diff;
    }
  }
  return like;
}

/** Σ (λ − d log λ) over valid pixels, λ = max(m, 0) + ε; r = 1 − d/λ there and 0 at masked ones. */
function poissonTerm(
  model: RealArray,
  data: Float64Array,
  valid: Uint8Array,
  eps: number,
  r: RealArray,
  width: number,
  height: number,
  pw: number,
): number {
  let like = 0;
  for (let y = 0; y < height; y++) {
    const row = y * width;
    const prow = y * pw;
    for (let x = 0; x < width; x++) {
      const i = row + x;
      if (valid[i] === 0) {
        r[prow + x] = 0;
        continue;
      }
      const lambda = Math.max(model[prow + x]!, 0) + eps;
      const d = data[i]!;
      like += lambda - (d > 0 ? d * Math.log(lambda) : 0);
      r[prow + x] = 1 - d / lambda;
    }
  }
  return like;
}

/** u = exp(clip τ) at the listed pixels into the padded grid; returns their prior Σ (α τ + q/u). */
function compactAt(
  active: Int32Array,
  tau: Float64Array,
  uPadded: RealArray,
  width: number,
  pw: number,
  tauMin: number,
  tauMax: number,
  alpha: number,
  q: number,
): number {
  let prior = 0;
  for (let j = 0; j < active.length; j++) {
    const i = active[j]!;
    const raw = tau[i]!;
    const t = raw < tauMin ? tauMin : raw > tauMax ? tauMax : raw;
    const u = Math.exp(t);
    uPadded[i + ((i / width) | 0) * (pw - width)] = u;
    prior += alpha * t + q / u;
  }
  return prior;
}

/** ∂f/∂τ = gt·u + α − q/u at the listed pixels (0 outside the clip range). */
function compactGradientAt(
  active: Int32Array,
  tau: Float64Array,
  gt: RealArray,
  uPadded: RealArray,
  gTau: RealArray,
  width: number,
  pw: number,
  tauMin: number,
  tauMax: number,
  alpha: number,
  q: number,
): void {
  for (let j = 0; j < active.length; j++) {
    const i = active[j]!;
    const raw = tau[i]!;
    if (raw < tauMin || raw > tauMax) {
      gTau[i] = 0;
      continue;
    }
    const k = i + ((i / width) | 0) * (pw - width);
    const u = uPadded[k]!;
    gTau[i] = gt[k]! * u + alpha - q / u;
  }
}

// Elementwise passes of the objective, each in its own small function (V8 optimises them better than inside
// the long evaluate method); the arithmetic and its order are those of the plain loops.

/** out = A ⊙ ξ; returns Σ ½ ξ². */
function phiHatAndHalfSquares(amplitude: Float32Array, xi: Float64Array, out: RealArray): number {
  let acc = 0;
  for (let i = 0; i < xi.length; i++) {
    const v = xi[i]!;
    out[i] = amplitude[i]! * v;
    acc += 0.5 * v * v;
  }
  return acc;
}

/** out = a ⊙ b; returns Σ a ⊙ b. */
function productInto(a: RealArray, b: RealArray, out: RealArray): number {
  let sum = 0;
  for (let i = 0; i < out.length; i++) {
    const v = a[i]! * b[i]!;
    out[i] = v;
    sum += v;
  }
  return sum;
}

/** g = A ⊙ g + ξ. */
function amplitudeGradient(amplitude: Float32Array, g: RealArray, xi: Float64Array): void {
  for (let i = 0; i < g.length; i++) g[i] = amplitude[i]! * g[i]! + xi[i]!;
}

/** a = 0 in the padding (columns ≥ width of the image rows, and every row ≥ height). */
function zeroOutsideImage(a: RealArray, width: number, height: number, pw: number): void {
  if (pw > width) for (let y = 0; y < height; y++) a.fill(0, y * pw + width, (y + 1) * pw);
  a.fill(0, height * pw);
}

/** |K_k|² for every Hartley mode of the padded grid, from the real FFT of the kernel (Hermitian mirror); stored in
 *  float32 (spectrum.ts ModeGrid). */
export function kernelTransferPower(
  kernel: Float64Array,
  pw: number,
  ph: number,
  shared?: RealFft2d,
): Float32Array {
  const fft = shared ?? createRealFft2d(pw, ph);
  const sw = fft.spectrumWidth;
  const re = new Float64Array(sw * ph);
  const im = new Float64Array(sw * ph);
  try {
    fft.forward(kernel, re, im);
  } finally {
    if (shared === undefined) fft.dispose();
  }
  const out = new Float32Array(pw * ph);
  for (let ky = 0; ky < ph; ky++) {
    for (let kx = 0; kx < pw; kx++) {
      const sx = kx < sw ? kx : pw - kx;
      const sy = kx < sw ? ky : (ph - ky) % ph;
      const j = sy * sw + sx;
      out[ky * pw + kx] = re[j]! * re[j]! + im[j]! * im[j]!;
    }
  }
  return out;
}
