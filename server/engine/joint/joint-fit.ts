/**
 * The staged MAP fit of the joint model (joint-model.ts), following the single-image staged fit
 * (fit/staged-fit.ts, METHOD-NOTES):
 *
 * 1. Diffuse only, spectrum tapered at kc = 1/(3·FWHM) of the sharpest image (in common pixels), compact pixels
 *    "off"; the flux-scale factors are free from the start (they are a handful of numbers and the diffuse
 *    stage is where most of the flux is). Two passes with a spectrum update in between.
 * 2. The field re-expressed for the full spectrum.
 * 3. `seedRounds` rounds: seeds at matched-filter maxima of the sharpest image's residual on its own grid
 *    (fit/seed-points.ts), carried to the common pixel they fall in with their flux converted by 1/(c g); then
 *    a joint fit of everything and a spectrum update; then the final fit.
 * Preconditioning (exact change of variables x = x0 + D ⊙ y per stage), with each image's share summed:
 *   diffuse modes D_k = 1/√(1 + P_k Σ_i |K_i,k|² κ_i),  κ_i = (c_i g_i)² Σ_j w_ij (R_i s)_j² / N;
 *   mean level D_μ = 1/√(1 + Σ_i (c_i g_i)² Σ_j w_ij (R_i s)_j²);
 *   compact pixels D = 1/√(1 + u² Σ_i (c_i g_i)² ΣK_i² f_i² (R_iᵀ w_i) + q/u), f_i² the image-to-common pixel
 *   area ratio (ΣP² of a PSF grows with the pixel area);
 *   log scale factors D = 1/√(1/w² + Σ_j w_ij m_ij²).
 * The spectrum update (critical filter, fit/spectrum.ts) uses the summed information Σ_i |K_i|² κ_i.
 *
 * Scale-factor errors (Laplace): the marginal variance of ℓ from the Schur complement of the Gauss–Newton
 * Hessian, S = H_ℓℓ − H_ℓx H_xx⁻¹ H_xℓ with x = (ξ, μ, τ), H_xx⁻¹ H_xℓ by preconditioned conjugate gradients
 * (Hessian-vector products from joint-model.ts). The curvature at a fixed sky would be far too small: one image
 * alone pins the sky's level, so ℓ_i is known only as well as both images together fix that level.
 * Stages stop on the objective's absolute decrease or, every 10 iterations, when no image's prediction or
 * compact component moved by more than `changeTolerance` σ at any pixel (the single-image fit's change test).
 */
import { createConvolver, goodFftSize } from '../fft';
import { matchedFilterSeeds } from '../fit/seed-points';
import {
  binnedPower,
  fitPowerLaw,
  modeWavenumbers,
  powerLawSpectrum,
  type BinnedPower,
  type SpectrumParameters,
} from '../fit/spectrum';
import { minimiseLbfgs } from '../optimise/lbfgs';
import { psfFwhmPx, psfKernelOnGrid, type Psf } from '../psf';
import { JointModel, type JointBlocks, type JointImageTerm } from './joint-model';
import type { PixelMap, Resampler } from './resample';

export interface JointFitImage {
  width: number;
  height: number;
  data: Float64Array;
  valid: Uint8Array;
  noise: { kind: 'gaussian'; sigma: number | Float64Array } | { kind: 'poisson' };
  /** PSF in the image's own pixels (for seeding on its grid). */
  psf: Psf;
  /** PSF at the common pixel scale. */
  commonPsf: Psf;
  resampler: Resampler;
  /** Image pixel (0-based) → common pixel (0-based). */
  toCommon: PixelMap;
  gain: number;
  /** Image pixel area in common pixels (f² for a pixel f common pixels wide). */
  pixelArea: number;
}

export interface JointFitOptions {
  alpha?: number;
  qRelative?: number;
  spectrum?: { amplitude?: number | null; slope?: number | null; estimate?: boolean };
  seedRounds?: number;
  seedSnr?: number;
  maxIterations?: number;
  absoluteDecrease?: number;
  slopeRange?: [number, number];
  /**
   * Stop a stage when no image's prediction nor compact component moved by more than this many σ at any pixel
   * over the last 10 iterations (5× looser in the early stages). @default 0.02
   */
  changeTolerance?: number;
  /** Width of the log-normal prior on the scale factors (0.05 = 5%). @default 0.05 */
  scalePriorWidth?: number;
  /** Fit the scale factors (false: all held at 1). @default true */
  fitScales?: boolean;
  /**
   * Images the diffuse-only first stage fits: the sharpest alone (default) or all. With all, the smooth images
   * make the diffuse field take broad bumps at every point source before any is seeded (measured: fewer seeds,
   * lower completeness), so the sharpest image alone starts the fit.
   */
  firstStageImages?: 'sharpest' | 'all';
  onProgress?: (p: {
    stage: string;
    iteration: number;
    objective: number;
    gradNorm: number;
    evaluations: number;
  }) => void;
  signal?: AbortSignal;
}

export interface JointFitResult {
  width: number;
  height: number;
  paddedWidth: number;
  paddedHeight: number;
  /** s and u on the common grid. */
  diffuseSky: Float64Array;
  compactSky: Float64Array;
  /** Per image: c g R K ⊛ s, c g R K ⊛ u and the whole prediction. */
  perImage: { diffuse: Float64Array; compact: Float64Array; model: Float64Array }[];
  /** c_i with its error (c_0 = 1 exactly, error 0). */
  scales: { value: number; error: number; logError: number }[];
  pedestal: number;
  alpha: number;
  q: number;
  fluxErrorScale: number;
  sharpest: number;
  spectrum: SpectrumParameters & { estimated: boolean; binned: BinnedPower };
  iterations: number;
  evaluations: number;
  objective: number;
  converged: boolean;
  trace: { stage: string; iteration: number; objective: number; gradNorm: number }[];
  seedsPerRound: number[];
  /** Conjugate-gradient iterations spent on the scale-factor errors. */
  schurIterations: number;
}

function median(values: number[]): number {
  const a = values.slice().sort((x, y) => x - y);
  const n = a.length;
  return n === 0 ? NaN : n % 2 ? a[(n - 1) / 2]! : (a[n / 2 - 1]! + a[n / 2]!) / 2;
}

export function jointPaddedSize(side: number, fwhmMajor: number): number {
  return goodFftSize(side + Math.max(Math.ceil(0.2 * side), Math.ceil(4 * fwhmMajor) + 8));
}

export function jointFit(
  width: number,
  height: number,
  images: JointFitImage[],
  options: JointFitOptions = {},
): JointFitResult {
  const alpha = options.alpha ?? 1.5;
  const qRelative = options.qRelative ?? 0.05;
  const seedRounds = options.seedRounds ?? 2;
  const seedSnr = options.seedSnr ?? 3;
  const maxIterations = options.maxIterations ?? 300;
  const absoluteDecrease = options.absoluteDecrease ?? 0.01;
  // Tighter than the single fit's 0.1: the smooth images' light can move between the diffuse and compact fields
  // while barely changing any prediction; 0.02 raised completeness and lowered the diffuse error on the test pairs.
  const changeTolerance = options.changeTolerance ?? 0.02;
  const changeWindow = 10;
  const [slopeMin, slopeMax] = options.slopeRange ?? [2, 6];
  const estimateSpectrum = options.spectrum?.estimate ?? true;
  const scaleSigma = Math.log(1 + (options.scalePriorWidth ?? 0.05));
  const fitScales = options.fitScales ?? true;
  const nImages = images.length;
  const m = width * height;

  const fwhms = images.map((img) => psfFwhmPx(img.commonPsf));
  const widest = Math.max(...fwhms.map((f) => f.major));
  // the sharpest image: the smallest PSF on the sky
  let sharpest = 0;
  for (let i = 1; i < nImages; i++) if (fwhms[i]!.major < fwhms[sharpest]!.major) sharpest = i;
  const pw = jointPaddedSize(width, widest);
  const ph = jointPaddedSize(height, widest);

  // Noise weights per image and the joint single-source flux error (in sky units).
  const inverseVariances = images.map((img) => {
    const iv = new Float64Array(img.width * img.height);
    if (img.noise.kind === 'gaussian') {
      const sigma = img.noise.sigma;
      for (let j = 0; j < iv.length; j++) {
        const s = typeof sigma === 'number' ? sigma : sigma[j]!;
        if (img.valid[j] && s > 0 && Number.isFinite(s)) iv[j] = 1 / (s * s);
      }
    } else {
      const values: number[] = [];
      for (let j = 0; j < iv.length; j++) if (img.valid[j]) values.push(img.data[j]!);
      const mean = values.reduce((a, b) => a + b, 0) / Math.max(1, values.length);
      iv.fill(1 / Math.max(mean, 0.01));
      for (let j = 0; j < iv.length; j++) if (!img.valid[j]) iv[j] = 0;
    }
    return iv;
  });
  const kernels = images.map((img) => psfKernelOnGrid(img.commonPsf, pw, ph));
  const sumK2 = kernels.map((k) => k.reduce((a, v) => a + v * v, 0));
  let information = 0;
  for (let i = 0; i < nImages; i++) {
    const w = median(Array.from(inverseVariances[i]!).filter((v) => v > 0));
    information += images[i]!.gain ** 2 * sumK2[i]! * images[i]!.pixelArea * w;
  }
  const fluxErrorScale = 1 / Math.sqrt(information);
  const q = qRelative * fluxErrorScale;
  const pedestal = q / alpha;

  const terms: JointImageTerm[] = images.map((img, i) => ({
    width: img.width,
    height: img.height,
    data: img.data,
    valid: img.valid,
    noise:
      img.noise.kind === 'gaussian'
        ? { kind: 'gaussian', inverseVariance: inverseVariances[i]! }
        : { kind: 'poisson' },
    kernel: kernels[i]!,
    resampler: img.resampler,
    gain: img.gain,
  }));
  const model = new JointModel({
    width,
    height,
    paddedWidth: pw,
    paddedHeight: ph,
    images: terms,
    alpha,
    q,
    scaleSigma,
  });
  const n = model.n;
  const k = modeWavenumbers(pw, ph);
  const kc = 1 / (3 * fwhms[sharpest]!.major);
  const turnover = 1 / Math.max(pw, ph);
  const power = new Float64Array(n);

  // Seeding on the sharpest image's own grid.
  const seedImage = images[sharpest]!;
  const spw = jointPaddedSize(seedImage.width, psfFwhmPx(seedImage.psf).major);
  const sph = jointPaddedSize(seedImage.height, psfFwhmPx(seedImage.psf).major);
  const seedKernel = psfKernelOnGrid(seedImage.psf, spw, sph);
  const seedPsf = createConvolver(spw, sph, seedKernel);
  const seedPsfSquared = createConvolver(
    spw,
    sph,
    seedKernel.map((v) => v * v),
  );

  try {
    // Start: the reference image's level and log variance, as in the single fit, in sky units per common pixel.
    const ref = images[0]!;
    const refValues: number[] = [];
    for (let j = 0; j < ref.data.length; j++) if (ref.valid[j]) refValues.push(ref.data[j]!);
    const refScale = ref.gain * ref.pixelArea;
    const sigmaRef = 1 / Math.sqrt(median(Array.from(inverseVariances[0]!).filter((v) => v > 0)));
    const level = Math.max(median(refValues) / refScale - pedestal, (0.1 * sigmaRef) / refScale);
    let mu = Math.log(level);
    // φ0 on the common grid: box-smoothed reference data (radius ~1 FWHM of the reference) at the reference
    // pixel each common pixel falls in.
    const refFwhm = psfFwhmPx(ref.psf).major;
    const r = Math.max(1, Math.round(refFwhm));
    const smooth = new Float64Array(ref.width * ref.height);
    const logs: number[] = [];
    for (let y = 0; y < ref.height; y++) {
      for (let x = 0; x < ref.width; x++) {
        let sum = 0;
        let c = 0;
        for (let yy = Math.max(0, y - r); yy <= Math.min(ref.height - 1, y + r); yy++) {
          for (let xx = Math.max(0, x - r); xx <= Math.min(ref.width - 1, x + r); xx++) {
            if (ref.valid[yy * ref.width + xx]) {
              sum += ref.data[yy * ref.width + xx]!;
              c++;
            }
          }
        }
        const floorLevel = Math.max((0.3 * sigmaRef) / refScale, 0.1 * level);
        const v = c > 0 ? Math.log(Math.max(sum / c / refScale - pedestal, floorLevel)) : mu;
        smooth[y * ref.width + x] = v;
        if (c > 0 && x % r === 0 && y % r === 0) logs.push(v);
      }
    }
    const meanLog = logs.reduce((a, v) => a + v, 0) / logs.length;
    const varLog = logs.reduce((a, v) => a + (v - meanLog) ** 2, 0) / logs.length;
    let spectrum: SpectrumParameters = { amplitude: 1, slope: options.spectrum?.slope ?? 3, turnover };
    {
      powerLawSpectrum(k, spectrum, null, power);
      let mean = 0;
      for (let i = 0; i < n; i++) mean += power[i]!;
      mean /= n;
      spectrum.amplitude = options.spectrum?.amplitude ?? Math.max(varLog, 0.01) / mean;
    }
    const xi = new Float64Array(n);
    {
      const phi0 = new Float64Array(n);
      for (let y = 0; y < height; y++) {
        for (let x = 0; x < width; x++) {
          const { index, weight } = ref.resampler.weightsOf(y * width + x);
          let best = -1;
          let bw = 0;
          index.forEach((j, t) => {
            if (weight[t]! > bw) {
              bw = weight[t]!;
              best = j;
            }
          });
          phi0[y * pw + x] = best >= 0 ? smooth[best]! - mu : 0;
        }
      }
      const hat = new Float64Array(n);
      model.hartleyTransform(phi0, hat);
      const nu = (sigmaRef / refScale / ((2 * r + 1) * level)) ** 2 / ref.pixelArea;
      powerLawSpectrum(k, spectrum, kc, power);
      for (let i = 0; i < n; i++) {
        const a = Math.sqrt(power[i]!);
        xi[i] = a > 0 ? (a * hat[i]!) / (a * a + nu) : 0;
      }
    }
    const tau = new Float64Array(m).fill(Math.log(pedestal));
    const ell = new Float64Array(nImages);
    let iterations = 0;
    let objective = 0;
    let converged = false;
    const trace: JointFitResult['trace'] = [];
    const seedsPerRound: number[] = [];
    const weights = images.map((img) => new Float64Array(img.width * img.height));
    const mapped = images.map((img) => new Float64Array(img.width * img.height));
    const phiHat = new Float64Array(n);
    let binned: BinnedPower = { k: [], power: [], mapPower: [], modes: [], information: [] };

    const setSpectrum = (taper: number | null): void => {
      powerLawSpectrum(k, spectrum, taper, power);
      model.setSpectrum(power);
    };

    /** κ_i per image at the current state (after an evaluation). */
    const kappas = (): number[] =>
      images.map((img, i) => {
        model.curvature(i, weights[i]!);
        img.resampler.apply(model.s, mapped[i]!, pw);
        if (model.active && !model.active[i]) return 0;
        const cg = Math.exp(ell[i]!) * img.gain;
        let sw = 0;
        for (let j = 0; j < mapped[i]!.length; j++) sw += mapped[i]![j]! ** 2 * weights[i]![j]!;
        return cg * cg * sw;
      });

    // Change test (as in the single-image fit): every `changeWindow` iterations, the largest change of any
    // image's prediction or compact component, in σ of that pixel, since the last check.
    const lastModels = images.map((img) => new Float64Array(img.width * img.height));
    const lastCompacts = images.map((img) => new Float64Array(img.width * img.height));
    const compactField = new Float64Array(n);
    const compactImage = images.map((img) => new Float64Array(img.width * img.height));
    const changeSinceLastCheck = (): number => {
      for (let y = 0; y < height; y++)
        for (let x = 0; x < width; x++)
          compactField[y * pw + x] = Math.exp(model.clipTau(tau[y * width + x]!));
      let worst = 0;
      for (let i = 0; i < nImages; i++) {
        if (model.active && !model.active[i]) continue;
        model.predict(i, compactField, Math.exp(ell[i]!), compactImage[i]!);
        const mdl = model.work[i]!.model;
        const w = weights[i]!;
        const lm = lastModels[i]!;
        const lc = lastCompacts[i]!;
        const cu = compactImage[i]!;
        for (let j = 0; j < mdl.length; j++) {
          const change = Math.max(Math.abs(mdl[j]! - lm[j]!), Math.abs(cu[j]! - lc[j]!)) * Math.sqrt(w[j]!);
          if (change > worst) worst = change;
          lm[j] = mdl[j]!;
          lc[j] = cu[j]!;
        }
      }
      return worst;
    };

    /** The diagonal preconditioner D of the free blocks at the current state (after an evaluation). */
    const diagonal = (blocks: JointBlocks): Float64Array => {
      const kap = kappas();
      const nDiffuse = blocks.diffuse ? n + 1 : 0;
      const nCompact = blocks.compact ? m : 0;
      const nScales = blocks.scales ? nImages - 1 : 0;
      const d = new Float64Array(nDiffuse + nCompact + nScales);
      if (blocks.diffuse) {
        let total = 0;
        for (const v of kap) total += v;
        for (let p = 0; p < n; p++) {
          let t = 0;
          for (let i = 0; i < nImages; i++) t += model.work[i]!.transferPower[p]! * kap[i]!;
          d[p] = 1 / Math.sqrt(1 + (power[p]! * t) / n);
        }
        d[n] = 1 / Math.sqrt(1 + total);
      }
      if (blocks.compact) {
        const compactCurvature = new Float64Array(m);
        const tmp = new Float64Array(m);
        for (let i = 0; i < nImages; i++) {
          if (model.active && !model.active[i]) continue;
          const img = images[i]!;
          img.resampler.adjoint(weights[i]!, tmp);
          const cg = Math.exp(ell[i]!) * img.gain;
          const factor = cg * cg * sumK2[i]! * img.pixelArea;
          for (let c = 0; c < m; c++) compactCurvature[c] = compactCurvature[c]! + factor * tmp[c]!;
        }
        for (let c = 0; c < m; c++) {
          const u = Math.exp(model.clipTau(tau[c]!));
          d[nDiffuse + c] = 1 / Math.sqrt(1 + u * u * compactCurvature[c]! + q / u);
        }
      }
      if (blocks.scales) {
        for (let i = 1; i < nImages; i++) {
          const mdl = model.work[i]!.model;
          let h = 0;
          for (let j = 0; j < mdl.length; j++) h += weights[i]![j]! * mdl[j]! ** 2;
          d[nDiffuse + nCompact + i - 1] = 1 / Math.sqrt(1 / (scaleSigma * scaleSigma) + h);
        }
      }
      return d;
    };

    const runStage = (
      stage: string,
      blocks: JointBlocks,
      tolerance: number,
      stageIterations: number,
      stageChangeTolerance: number,
    ): void => {
      model.evaluate(xi, mu, tau, ell, blocks, null, null, null);
      const d = diagonal(blocks);
      changeSinceLastCheck();
      const nDiffuse = blocks.diffuse ? n + 1 : 0;
      const nCompact = blocks.compact ? m : 0;
      const xi0 = Float64Array.from(xi);
      const mu0 = mu;
      const tau0 = Float64Array.from(tau);
      const ell0 = Float64Array.from(ell);
      const gXi = new Float64Array(n);
      const gTau = new Float64Array(m);
      const gEll = new Float64Array(nImages);
      const unpack = (y: Float64Array): void => {
        if (blocks.diffuse) {
          for (let p = 0; p < n; p++) xi[p] = xi0[p]! + d[p]! * y[p]!;
          mu = mu0 + d[n]! * y[n]!;
        }
        if (blocks.compact)
          for (let c = 0; c < m; c++) tau[c] = tau0[c]! + d[nDiffuse + c]! * y[nDiffuse + c]!;
        if (blocks.scales) {
          for (let i = 1; i < nImages; i++) {
            const o = nDiffuse + nCompact + i - 1;
            ell[i] = ell0[i]! + d[o]! * y[o]!;
          }
        }
      };
      const evaluationsBefore = model.evaluations;
      // stopWhen (the caller's convergence test) is read by minimiseLbfgs where it is supported; passed
      // through a plain object so that this compiles against either version of its options.
      const lbfgsOptions = {
        maxIterations: stageIterations,
        maxEvaluations: 3 * stageIterations,
        absoluteDecrease: tolerance,
        stallIterations: 3,
        gradientTolerance: 1e-6,
        signal: options.signal,
        stopWhen: (p: { iteration: number }) =>
          p.iteration % changeWindow === 0 && changeSinceLastCheck() < stageChangeTolerance,
        onProgress: (p: { iteration: number; objective: number; gradNorm: number; evaluations: number }) => {
          const entry = {
            stage,
            iteration: iterations + p.iteration,
            objective: p.objective,
            gradNorm: p.gradNorm,
          };
          trace.push(entry);
          options.onProgress?.({ ...entry, evaluations: evaluationsBefore + p.evaluations });
        },
      };
      const result = minimiseLbfgs(
        (y, g) => {
          unpack(y);
          const [f, gMu] = model.evaluate(
            xi,
            mu,
            tau,
            ell,
            blocks,
            blocks.diffuse ? gXi : null,
            blocks.compact ? gTau : null,
            blocks.scales ? gEll : null,
          );
          if (blocks.diffuse) {
            for (let p = 0; p < n; p++) g[p] = d[p]! * gXi[p]!;
            g[n] = d[n]! * gMu;
          }
          if (blocks.compact) for (let c = 0; c < m; c++) g[nDiffuse + c] = d[nDiffuse + c]! * gTau[c]!;
          if (blocks.scales) {
            for (let i = 1; i < nImages; i++) {
              const o = nDiffuse + nCompact + i - 1;
              g[o] = d[o]! * gEll[i]!;
            }
          }
          return f;
        },
        new Float64Array(d.length),
        lbfgsOptions,
      );
      unpack(result.x);
      iterations += result.iterations;
      objective = result.f;
      converged = result.converged;
    };

    const updateSpectrum = (kMax: number, taperAfter: number | null): void => {
      model.phiHat(xi, phiHat);
      model.evaluate(xi, mu, tau, ell, { diffuse: false, compact: false, scales: false }, null, null, null);
      const kap = kappas();
      let total = 0;
      for (const v of kap) total += v;
      const transfer = new Float64Array(n);
      for (let p = 0; p < n; p++) {
        let t = 0;
        for (let i = 0; i < nImages; i++) t += model.work[i]!.transferPower[p]! * kap[i]!;
        transfer[p] = total > 0 ? t / total : 0;
      }
      binned = binnedPower(k, phiHat, power, transfer, total / n, kMax);
      if (estimateSpectrum && binned.k.length >= 2) {
        const fitted = fitPowerLaw(binned, turnover, slopeMin, slopeMax);
        spectrum = {
          amplitude: options.spectrum?.amplitude ?? fitted.amplitude,
          slope: options.spectrum?.slope ?? fitted.slope,
          turnover,
        };
        if (options.spectrum?.slope != null && options.spectrum?.amplitude == null) {
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
      for (let p = 0; p < n; p++) xi[p] = model.amplitude[p]! > 0 ? phiHat[p]! / model.amplitude[p]! : 0;
    };

    const early = Math.max(1, Math.round(maxIterations / 3));
    const scales = fitScales && nImages > 1;
    const firstAll = (options.firstStageImages ?? 'sharpest') === 'all';
    const firstScales = scales && firstAll;
    if (!firstAll) model.active = images.map((_, i) => i === sharpest);
    setSpectrum(kc);
    runStage(
      'diffuse',
      { diffuse: true, compact: false, scales: firstScales },
      10 * absoluteDecrease,
      early,
      5 * changeTolerance,
    );
    updateSpectrum(kc / 2, kc);
    runStage(
      'diffuse',
      { diffuse: true, compact: false, scales: firstScales },
      10 * absoluteDecrease,
      early,
      5 * changeTolerance,
    );
    updateSpectrum(kc / 2, null);
    model.active = null;
    const seedResidual = new Float64Array(seedImage.width * seedImage.height);
    const seedWeight = new Float64Array(seedImage.width * seedImage.height);
    for (let round = 1; round <= seedRounds; round++) {
      model.evaluate(xi, mu, tau, ell, { diffuse: false, compact: false, scales: false }, null, null, null);
      model.curvature(sharpest, seedWeight);
      const pred = model.work[sharpest]!.model;
      for (let j = 0; j < seedResidual.length; j++)
        seedResidual[j] = seedImage.valid[j] ? seedImage.data[j]! - pred[j]! : 0;
      const seeds = matchedFilterSeeds({
        width: seedImage.width,
        height: seedImage.height,
        pw: spw,
        ph: sph,
        residual: seedResidual,
        weight: seedWeight,
        psf: seedPsf,
        psfSquared: seedPsfSquared,
        precision: 'float64',
        snr: seedSnr,
      });
      seedsPerRound.push(seeds.length);
      const cg = Math.exp(ell[sharpest]!) * seedImage.gain;
      for (const seed of seeds) {
        const [cx, cy] = seedImage.toCommon(
          seed.index % seedImage.width,
          Math.floor(seed.index / seedImage.width),
        );
        const x = Math.round(cx);
        const y = Math.round(cy);
        if (!(x >= 0 && x < width && y >= 0 && y < height)) continue;
        const c = y * width + x;
        const u = Math.exp(model.clipTau(tau[c]!));
        tau[c] = model.clipTau(Math.log(u + seed.flux / cg));
      }
      runStage(
        `joint-${round}`,
        { diffuse: true, compact: true, scales },
        5 * absoluteDecrease,
        early,
        5 * changeTolerance,
      );
      updateSpectrum(kc / 2, null);
    }
    runStage(
      'final',
      { diffuse: true, compact: true, scales },
      absoluteDecrease,
      // twice the single fit's budget: a much more sensitive second image makes the problem worse conditioned
      // (measured: the final stage of a 128² pair needed ~350 iterations where one image needs ~70)
      2 * maxIterations,
      changeTolerance,
    );
    const finalObjective = objective;
    const finalConverged = converged;

    // Scale-factor errors: Laplace, from the Schur complement of the Gauss–Newton Hessian (see the header).
    const scaleErrors = new Float64Array(nImages);
    let schurIterations = 0;
    if (scales) {
      model.evaluate(xi, mu, tau, ell, { diffuse: false, compact: false, scales: false }, null, null, null);
      const blocks = { diffuse: true, compact: true, scales: false };
      const d = diagonal(blocks);
      const dim = n + 1 + m;
      const u = new Float64Array(m);
      for (let p = 0; p < m; p++) u[p] = Math.exp(model.clipTau(tau[p]!));
      const columns: Float64Array[] = [];
      const hll: number[] = [];
      for (let i = 1; i < nImages; i++) {
        const col = new Float64Array(dim);
        model.crossColumn(i, ell, u, col);
        columns.push(col);
        const mdl = model.work[i]!.model;
        let h = 1 / (scaleSigma * scaleSigma);
        for (let j = 0; j < mdl.length; j++) h += weights[i]![j]! * mdl[j]! ** 2;
        hll.push(h);
      }
      // S = H_ℓℓ − H_ℓx H_xx⁻¹ H_xℓ, by preconditioned conjugate gradients per column.
      const k1 = nImages - 1;
      const schur = Array.from({ length: k1 }, (_, a) =>
        Array.from({ length: k1 }, (_, b) => (a === b ? hll[a]! : 0)),
      );
      for (let a = 0; a < k1; a++) {
        const { solution, iterations: used } = conjugateGradient(
          (v, out) => model.hessianVector(ell, u, v, out),
          columns[a]!,
          d,
          { maxIterations: 600, relativeChange: 1e-5, signal: options.signal },
        );
        schurIterations += used;
        for (let b = 0; b < k1; b++) {
          let dot = 0;
          for (let t = 0; t < dim; t++) dot += columns[b]![t]! * solution[t]!;
          schur[a]![b] = schur[a]![b]! - dot;
        }
      }
      const covariance = invertSymmetric(schur);
      for (let a = 0; a < k1; a++) scaleErrors[a + 1] = Math.sqrt(Math.max(covariance[a]![a]!, 0));
    }

    // Components.
    model.evaluate(xi, mu, tau, ell, { diffuse: false, compact: false, scales: false }, null, null, null);
    const sPadded = Float64Array.from(model.s);
    const uPadded = new Float64Array(n);
    const diffuseSky = new Float64Array(m);
    const compactSky = new Float64Array(m);
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        diffuseSky[y * width + x] = sPadded[y * pw + x]!;
        const u = Math.exp(model.clipTau(tau[y * width + x]!));
        compactSky[y * width + x] = u;
        uPadded[y * pw + x] = u;
      }
    }
    const perImage = images.map((img, i) => {
      const full = Float64Array.from(model.work[i]!.model);
      const diffuse = new Float64Array(full.length);
      model.predict(i, sPadded, Math.exp(ell[i]!), diffuse);
      const compact = new Float64Array(full.length);
      for (let j = 0; j < full.length; j++) compact[j] = full[j]! - diffuse[j]!;
      return { diffuse, compact, model: full };
    });
    return {
      width,
      height,
      paddedWidth: pw,
      paddedHeight: ph,
      diffuseSky,
      compactSky,
      perImage,
      scales: Array.from(ell, (l, i) => ({
        value: Math.exp(l),
        error: Math.exp(l) * scaleErrors[i]!,
        logError: scaleErrors[i]!,
      })),
      pedestal,
      alpha,
      q,
      fluxErrorScale,
      sharpest,
      spectrum: { ...spectrum, estimated: estimateSpectrum, binned },
      iterations,
      evaluations: model.evaluations,
      objective: finalObjective,
      converged: finalConverged,
      trace,
      seedsPerRound,
      schurIterations,
    };
  } finally {
    model.dispose();
    seedPsf.dispose();
    seedPsfSquared.dispose();
  }
}

/**
 * Solves H z = b for a symmetric positive definite H (given as a product) by conjugate gradients with the
 * preconditioner M⁻¹ = D² (Hestenes & Stiefel 1952; Nocedal & Wright, Numerical Optimization, Algorithm 5.3).
 * Stops when bᵀz (which rises monotonically towards bᵀH⁻¹b) changes by less than `relativeChange` of itself.
 */
export function conjugateGradient(
  multiply: (v: Float64Array, out: Float64Array) => void,
  b: Float64Array,
  d: Float64Array,
  options: { maxIterations: number; relativeChange: number; signal?: AbortSignal },
): { solution: Float64Array; iterations: number; quadratic: number } {
  const dim = b.length;
  const z = new Float64Array(dim);
  const r = Float64Array.from(b);
  const y = Float64Array.from(r, (v, i) => v * d[i]! * d[i]!);
  const p = Float64Array.from(y);
  const hp = new Float64Array(dim);
  let ry = 0;
  for (let i = 0; i < dim; i++) ry += r[i]! * y[i]!;
  let quadratic = 0;
  let iterations = 0;
  for (; iterations < options.maxIterations; iterations++) {
    options.signal?.throwIfAborted();
    multiply(p, hp);
    let php = 0;
    for (let i = 0; i < dim; i++) php += p[i]! * hp[i]!;
    if (!(php > 0)) break;
    const step = ry / php;
    for (let i = 0; i < dim; i++) {
      z[i] = z[i]! + step * p[i]!;
      r[i] = r[i]! - step * hp[i]!;
    }
    // bᵀz grows by step·ry each iteration (the CG energy identity)
    const gain = step * ry;
    quadratic += gain;
    let ryNew = 0;
    for (let i = 0; i < dim; i++) {
      y[i] = r[i]! * d[i]! * d[i]!;
      ryNew += r[i]! * y[i]!;
    }
    if (gain < options.relativeChange * quadratic) {
      iterations++;
      break;
    }
    const beta = ryNew / ry;
    ry = ryNew;
    for (let i = 0; i < dim; i++) p[i] = y[i]! + beta * p[i]!;
  }
  return { solution: z, iterations, quadratic };
}

/** Inverse of a small symmetric positive definite matrix (Gauss–Jordan). */
function invertSymmetric(a: number[][]): number[][] {
  const k = a.length;
  const m = a.map((row, i) => [...row, ...Array.from({ length: k }, (_, j) => (i === j ? 1 : 0))]);
  for (let c = 0; c < k; c++) {
    const pivot = m[c]![c]!;
    for (let j = 0; j < 2 * k; j++) m[c]![j] = m[c]![j]! / pivot;
    for (let r = 0; r < k; r++) {
      if (r === c) continue;
      const f = m[r]![c]!;
      for (let j = 0; j < 2 * k; j++) m[r]![j] = m[r]![j]! - f * m[c]![j]!;
    }
  }
  return m.map((row) => row.slice(k));
}
