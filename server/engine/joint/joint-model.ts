/**
 * The MAP objective of a joint fit of several images of one field, and its analytic gradient.
 *
 *   image_i = c_i · g_i · R_i (K_i ⊛ (s + u)) + noise_i,   s = exp(μ + H(A ⊙ ξ)),  u = exp(τ),  c_i = exp(ℓ_i)
 *
 * - s, u live on the common grid (common-grid.ts), padded as in the single-image model (fit/model.ts): the
 *   common image region is the corner [0, W) × [0, H) of a periodic Pw × Ph grid; u only on the region.
 * - K_i: image i's PSF at the common pixel scale (unit sum, centred at (0, 0)), applied on the padded grid.
 * - R_i: the flux-conserving resampler from the common region onto image i's pixels (resample.ts).
 * - g_i: the unit gain of image i relative to the reference (units.ts); c_i the flux-scale factor, log-normal
 *   prior around 1: −log p = ℓ_i² / (2 w²) with w = ln(1 + width); c_0 = 1 is fixed (ℓ_0 = 0).
 * - Priors on ξ, μ, τ exactly as in the single-image model; likelihood per image Gaussian (own 1/σ²) or Poisson,
 *   over the valid pixels of that image (its mask and the pixels the common region covers).
 * Gradient: r_i = ∂L_i/∂m_i; back-projection b = Σ_i K_iᵀ ⋆ Rᵀ_i (c_i g_i r_i) on the padded grid, then as in
 * the single model ∂/∂τ = b ⊙ u + α − q/u, ∂/∂ξ = A ⊙ H(b ⊙ s) + ξ, ∂/∂μ = Σ b ⊙ s; and ∂/∂ℓ_i = Σ_j r_ij m_ij
 * + ℓ_i / w². One evaluation: 2 Hartley transforms and, per image, one convolution and one adjoint.
 */
import {
  createConvolver,
  createHartley2d,
  createRealFft2d,
  type Convolver,
  type Hartley2d,
  type RealFft2d,
} from '../fft';
import { kernelTransferPower } from '../fit/model';
import type { Resampler } from './resample';

export interface JointImageTerm {
  width: number;
  height: number;
  data: Float64Array;
  /** 1 = enters the likelihood. */
  valid: Uint8Array;
  noise: { kind: 'gaussian'; inverseVariance: Float64Array } | { kind: 'poisson' };
  /** K_i on the padded common grid, centred at (0, 0), unit sum. */
  kernel: Float64Array;
  resampler: Resampler;
  gain: number;
}

export interface JointSetup {
  width: number;
  height: number;
  paddedWidth: number;
  paddedHeight: number;
  images: JointImageTerm[];
  alpha: number;
  q: number;
  /** w = ln(1 + prior width) of the log scale factors. */
  scaleSigma: number;
}

export interface JointBlocks {
  diffuse: boolean;
  compact: boolean;
  scales: boolean;
}

interface ImageWork {
  convolver: Convolver;
  transferPower: Float32Array;
  floor: number;
  /** the image's prediction of the last evaluation */
  model: Float64Array;
  residualDerivative: Float64Array;
}

export class JointModel {
  readonly width: number;
  readonly height: number;
  readonly pw: number;
  readonly ph: number;
  readonly n: number;
  readonly m: number;
  readonly setup: JointSetup;
  readonly amplitude: Float64Array;
  readonly fft: RealFft2d;
  readonly work: ImageWork[];
  tauMin: number;
  tauMax: number;
  evaluations = 0;
  /** Images whose likelihood enters the objective (null: all); a fit stage may leave some out. */
  active: boolean[] | null = null;
  private readonly hartley: Hartley2d;
  readonly s: Float64Array;
  readonly phi: Float64Array;
  readonly total: Float64Array;
  readonly back: Float64Array;
  private readonly tmp: Float64Array;
  private readonly tmp2: Float64Array;
  private readonly u: Float64Array;
  private scratchField: Float64Array | null = null;
  private readonly scratchWeight: Float64Array[] = [];
  private readonly scratchImage: Float64Array[] = [];

  constructor(setup: JointSetup) {
    this.setup = setup;
    this.width = setup.width;
    this.height = setup.height;
    this.pw = setup.paddedWidth;
    this.ph = setup.paddedHeight;
    this.n = this.pw * this.ph;
    this.m = this.width * this.height;
    this.fft = createRealFft2d(this.pw, this.ph);
    this.hartley = createHartley2d(this.pw, this.ph, { fft: this.fft });
    this.amplitude = new Float64Array(this.n);
    this.s = new Float64Array(this.n);
    this.phi = new Float64Array(this.n);
    this.total = new Float64Array(this.n);
    this.back = new Float64Array(this.n);
    this.tmp = new Float64Array(this.n);
    this.tmp2 = new Float64Array(this.n);
    this.u = new Float64Array(this.m);
    let maxAbs = 0;
    this.work = setup.images.map((img) => {
      let sum = 0;
      let count = 0;
      for (let j = 0; j < img.data.length; j++) {
        if (!img.valid[j]) continue;
        sum += img.data[j]!;
        count++;
        maxAbs = Math.max(maxAbs, Math.abs(img.data[j]! / img.gain));
      }
      return {
        convolver: createConvolver(this.pw, this.ph, img.kernel, { fft: this.fft }),
        transferPower: kernelTransferPower(img.kernel, this.pw, this.ph, this.fft),
        floor: 1e-8 * Math.max(1, count > 0 ? sum / count : 1),
        model: new Float64Array(img.width * img.height),
        residualDerivative: new Float64Array(img.width * img.height),
      };
    });
    const off = Math.log(setup.q / setup.alpha);
    this.tauMin = off - 30;
    this.tauMax = Math.log(Math.max(maxAbs, setup.q) * 1e4 + setup.q);
  }

  dispose(): void {
    for (const w of this.work) w.convolver.dispose();
    this.hartley.dispose();
    this.fft.dispose();
  }

  setSpectrum(power: Float64Array): void {
    for (let i = 0; i < this.n; i++) this.amplitude[i] = Math.sqrt(power[i]!);
  }

  hartleyTransform(input: Float64Array, output: Float64Array): void {
    this.hartley.transform(input, output);
  }

  phiHat(xi: Float64Array, out: Float64Array): Float64Array {
    for (let i = 0; i < this.n; i++) out[i] = this.amplitude[i]! * xi[i]!;
    return out;
  }

  diffuseField(xi: Float64Array, mu: number): Float64Array {
    this.phiHat(xi, this.tmp);
    this.hartley.transform(this.tmp, this.phi);
    for (let i = 0; i < this.n; i++) {
      const p = this.phi[i]! + mu;
      this.phi[i] = p;
      this.s[i] = Math.exp(Math.min(p, 700));
    }
    return this.s;
  }

  clipTau(t: number): number {
    return t < this.tauMin ? this.tauMin : t > this.tauMax ? this.tauMax : t;
  }

  /** c_i g_i R_i (K_i ⊛ field) for a padded-grid field, into out (image i grid). */
  predict(i: number, field: Float64Array, scale: number, out: Float64Array): void {
    const img = this.setup.images[i]!;
    this.work[i]!.convolver.apply(field, this.tmp2);
    img.resampler.apply(this.tmp2, out, this.pw);
    const k = scale * img.gain;
    for (let j = 0; j < out.length; j++) out[j] = out[j]! * k;
  }

  /**
   * Objective and gradient; gradients written only for the free blocks (gEll[0] is always 0). Returns
   * [objective, ∂/∂μ].
   */
  evaluate(
    xi: Float64Array,
    mu: number,
    tau: Float64Array,
    ell: Float64Array,
    blocks: JointBlocks,
    gXi: Float64Array | null,
    gTau: Float64Array | null,
    gEll: Float64Array | null,
  ): [number, number] {
    this.evaluations++;
    const { width, height, pw } = this;
    const { alpha, q, scaleSigma } = this.setup;
    const s = this.diffuseField(xi, mu);
    const total = this.total;
    total.set(s);
    let prior = 0;
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const t = this.clipTau(tau[y * width + x]!);
        const u = Math.exp(t);
        this.u[y * width + x] = u;
        total[y * pw + x] = total[y * pw + x]! + u;
        prior += alpha * t + q / u;
      }
    }
    for (let i = 0; i < xi.length; i++) prior += 0.5 * xi[i]! * xi[i]!;
    for (let i = 1; i < ell.length; i++) prior += (ell[i]! * ell[i]!) / (2 * scaleSigma * scaleSigma);
    let like = 0;
    const wantGradient = gXi !== null || gTau !== null || gEll !== null;
    if (wantGradient) this.back.fill(0);
    for (let i = 0; i < this.setup.images.length; i++) {
      const img = this.setup.images[i]!;
      const w = this.work[i]!;
      const c = Math.exp(ell[i]!);
      this.predict(i, total, c, w.model);
      if (this.active && !this.active[i]) {
        if (gEll) gEll[i] = 0;
        continue;
      }
      const r = w.residualDerivative;
      const mdl = w.model;
      let dEll = 0;
      if (img.noise.kind === 'gaussian') {
        const iv = img.noise.inverseVariance;
        for (let j = 0; j < mdl.length; j++) {
          if (!img.valid[j]) {
            r[j] = 0;
            continue;
          }
          const diff = mdl[j]! - img.data[j]!;
          like += 0.5 * iv[j]! * diff * diff;
          r[j] = iv[j]! * diff;
          dEll += r[j]! * mdl[j]!;
        }
      } else {
        for (let j = 0; j < mdl.length; j++) {
          if (!img.valid[j]) {
            r[j] = 0;
            continue;
          }
          const lambda = Math.max(mdl[j]!, 0) + w.floor;
          const d = img.data[j]!;
          like += lambda - (d > 0 ? d * Math.log(lambda) : 0);
          r[j] = 1 - d / lambda;
          dEll += r[j]! * (mdl[j]! > 0 ? mdl[j]! : 0);
        }
      }
      if (gEll) gEll[i] = i > 0 && blocks.scales ? dEll + ell[i]! / (scaleSigma * scaleSigma) : 0;
      if (wantGradient && (blocks.diffuse || blocks.compact)) {
        // b += K_iᵀ ⋆ R_iᵀ (c g r)
        const k = c * img.gain;
        for (let j = 0; j < r.length; j++) r[j] = r[j]! * k;
        this.tmp2.fill(0);
        img.resampler.adjoint(r, this.tmp2, pw);
        w.convolver.adjoint(this.tmp2, this.tmp2);
        for (let p = 0; p < this.n; p++) this.back[p] = this.back[p]! + this.tmp2[p]!;
        for (let j = 0; j < r.length; j++) r[j] = r[j]! / k;
      }
    }
    const f = like + prior;
    if (!wantGradient) return [f, 0];
    const b = this.back;
    if (gTau) {
      for (let y = 0; y < height; y++) {
        for (let x = 0; x < width; x++) {
          const i = y * width + x;
          const raw = tau[i]!;
          if (!blocks.compact || raw < this.tauMin || raw > this.tauMax) {
            gTau[i] = 0;
            continue;
          }
          const u = this.u[i]!;
          gTau[i] = b[y * pw + x]! * u + alpha - q / u;
        }
      }
    }
    let gMu = 0;
    if (gXi && blocks.diffuse) {
      const t = this.tmp;
      for (let p = 0; p < this.n; p++) {
        const v = b[p]! * s[p]!;
        t[p] = v;
        gMu += v;
      }
      this.hartley.transform(t, gXi);
      for (let p = 0; p < this.n; p++) gXi[p] = this.amplitude[p]! * gXi[p]! + xi[p]!;
    } else if (gXi) {
      gXi.fill(0);
    }
    return [f, gMu];
  }

  /** back = Σ_i K_iᵀ ⋆ R_iᵀ (c_i g_i W_i δm_i) with δm_i = c_i g_i R_i (K_i ⊛ field), into this.back. */
  private gaussNewtonBack(field: Float64Array, ell: Float64Array, only: number | null): void {
    this.back.fill(0);
    for (let i = 0; i < this.setup.images.length; i++) {
      if (only !== null && i !== only) continue;
      const img = this.setup.images[i]!;
      const w = this.work[i]!;
      const weight = (this.scratchWeight[i] ??= new Float64Array(img.width * img.height));
      this.curvature(i, weight);
      const dm = (this.scratchImage[i] ??= new Float64Array(img.width * img.height));
      const k = Math.exp(ell[i]!) * img.gain;
      if (only === null) {
        this.predict(i, field, Math.exp(ell[i]!), dm);
        for (let j = 0; j < dm.length; j++) dm[j] = dm[j]! * weight[j]! * k;
      } else {
        // the cross term with ℓ_i: ∂m_i/∂ℓ_i = m_i
        for (let j = 0; j < dm.length; j++) dm[j] = w.model[j]! * weight[j]! * k;
      }
      this.tmp2.fill(0);
      img.resampler.adjoint(dm, this.tmp2, this.pw);
      w.convolver.adjoint(this.tmp2, this.tmp2);
      for (let p = 0; p < this.n; p++) this.back[p] = this.back[p]! + this.tmp2[p]!;
    }
  }

  /** Writes [∂/∂ξ, ∂/∂μ, ∂/∂τ] of a back-projection (this.back) into out (length n + 1 + m). */
  private backToParameters(u: Float64Array, out: Float64Array): void {
    const { width, height, pw, n } = this;
    const t = this.tmp;
    let gMu = 0;
    for (let p = 0; p < n; p++) {
      const v = this.back[p]! * this.s[p]!;
      t[p] = v;
      gMu += v;
    }
    const gXi = out.subarray(0, n);
    this.hartley.transform(t, gXi);
    for (let p = 0; p < n; p++) gXi[p] = this.amplitude[p]! * gXi[p]!;
    out[n] = gMu;
    for (let y = 0; y < height; y++)
      for (let x = 0; x < width; x++) out[n + 1 + y * width + x] = this.back[y * pw + x]! * u[y * width + x]!;
  }

  /**
   * Gauss–Newton Hessian (Fisher information of the likelihood plus the prior curvature) of (ξ, μ, τ) times v,
   * at the state of the last evaluation (s, u and the models): J = ∂m/∂(ξ, μ, τ) with
   * δt = s ⊙ (H(A ⊙ δξ) + δμ) + u ⊙ δτ; prior curvature 1 for ξ, 0 for μ, q/u for τ.
   */
  hessianVector(ell: Float64Array, u: Float64Array, v: Float64Array, out: Float64Array): void {
    const { width, height, pw, n } = this;
    const field = (this.scratchField ??= new Float64Array(n));
    this.phiHat(v.subarray(0, n) as Float64Array, this.tmp);
    this.hartley.transform(this.tmp, field);
    const vMu = v[n]!;
    for (let p = 0; p < n; p++) field[p] = this.s[p]! * (field[p]! + vMu);
    for (let y = 0; y < height; y++)
      for (let x = 0; x < width; x++)
        field[y * pw + x] = field[y * pw + x]! + u[y * width + x]! * v[n + 1 + y * width + x]!;
    this.gaussNewtonBack(field, ell, null);
    this.backToParameters(u, out);
    for (let p = 0; p < n; p++) out[p] = out[p]! + v[p]!;
    const { q } = this.setup;
    for (let c = 0; c < this.m; c++) out[n + 1 + c] = out[n + 1 + c]! + (q / u[c]!) * v[n + 1 + c]!;
  }

  /** The Gauss–Newton cross column ∂²F/∂(ξ, μ, τ)∂ℓ_i at the last evaluation. */
  crossColumn(i: number, ell: Float64Array, u: Float64Array, out: Float64Array): void {
    this.gaussNewtonBack(this.total, ell, i);
    this.backToParameters(u, out);
  }

  /** Likelihood curvature per pixel of image i (1/σ², or 1/λ at the last evaluation), 0 where not valid. */
  curvature(i: number, out: Float64Array): Float64Array {
    const img = this.setup.images[i]!;
    const w = this.work[i]!;
    for (let j = 0; j < out.length; j++) {
      if (!img.valid[j]) out[j] = 0;
      else if (img.noise.kind === 'gaussian') out[j] = img.noise.inverseVariance[j]!;
      else out[j] = 1 / (Math.max(w.model[j]!, 0) + Math.max(w.floor, 0.5));
    }
    return out;
  }
}
