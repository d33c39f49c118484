/**
 * The power spectrum of the diffuse field's exponent φ, and its estimate from the data.
 *
 * Coordinates. φ lives on the padded N = width × height grid as φ = μ + H(A ⊙ ξ), with H the orthonormal 2-D
 * Hartley transform (real, symmetric, orthogonal) and ξ white with a standard-normal prior. Each Hartley mode k is
 * then an independent Gaussian with variance P_k = A_k², and the variance of φ at a pixel is the mean of P_k over
 * all modes, so P is a per-mode variance that does not depend on the grid size for a given physical spectrum.
 * The constant mode (k = 0) carries no prior power; the mean level μ is a separate parameter with a flat prior.
 *
 * Model (isotropic power law with a low-k turnover):
 *   P(k) = a · (k² + k0²)^(−γ/2),  k = |(kx, ky)| in cycles per pixel, k0 = 1/(the padded grid's longer side).
 * The optional taper for the first, diffuse-only stage multiplies P by exp(−(k/kc)²) with kc = 1/(2·FWHM)
 * (METHOD-NOTES: keeps the diffuse field from swallowing point sources before they are seeded).
 *
 * Estimate (critical-filter style; an empirical-Bayes update of the prior from the posterior): at the MAP field
 * the expected power of mode k is ⟨φ_k²⟩ ≈ φ̂_k² + D_k with D_k the Laplace posterior variance of the mode,
 *   D_k = 1 / (1/P_k + |K_k|² κ),   κ = Σ_valid s² w / N,
 * w the likelihood's curvature per pixel in the model (1/σ² or 1/λ), K_k the PSF's transfer function. The
 * variance term keeps the power where the data say nothing (without it the estimate collapses there:
 * METHOD-NOTES). The binned ⟨φ_k²⟩ are fitted by least squares in log P against log(k² + k0²), weighted by the
 * data's information per bin, Σ_k (1 − D_k/P_k): modes the data do not constrain return the prior (p_k ≈ P_k)
 * and would only anchor the fit at the starting spectrum, so they get no weight. This gives a and γ (γ kept within
 * [slopeMin, slopeMax]); the power law then extrapolates to the scales the data do not reach.
 */

export interface SpectrumParameters {
  /** a: power at the turnover scale (per-mode variance of φ, nats²). */
  amplitude: number;
  /** γ: the power-law slope, P ∝ k^−γ at k ≫ k0. */
  slope: number;
  /** k0, cycles per pixel. */
  turnover: number;
}

export interface BinnedPower {
  /** Bin centres, cycles per pixel. */
  k: number[];
  /** Mean ⟨φ_k²⟩ = φ̂_k² + D_k of the modes in each bin. */
  power: number[];
  /** Mean φ̂_k² of the MAP field alone. */
  mapPower: number[];
  /** Modes per bin. */
  modes: number[];
  /** Σ over the bin's modes of the information fraction 1 − D_k/P_k (how much the data constrain them). */
  information: number[];
}

/** A per-mode grid stored in float32 (wavenumbers, spectra, PSF transfer: factors of the objective, not its
 *  state; half the memory of float64) or float64. */
export type ModeGrid = Float32Array | Float64Array;

/** |k| of every mode of a width × height grid (row-major, cycles per pixel, both signs folded), in float32. */
export function modeWavenumbers(width: number, height: number): Float32Array {
  const k = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    const fy = Math.min(y, height - y) / height;
    for (let x = 0; x < width; x++) {
      const fx = Math.min(x, width - x) / width;
      k[y * width + x] = Math.sqrt(fx * fx + fy * fy);
    }
  }
  return k;
}

/** Writes P_k (optionally tapered above kc) into `out`; mode 0 gets 0. */
export function powerLawSpectrum<T extends ModeGrid>(
  k: ModeGrid,
  p: SpectrumParameters,
  taperK: number | null,
  out: T,
): T {
  const k02 = p.turnover * p.turnover;
  const half = -p.slope / 2;
  // a·(k² + k0²)^(−γ/2)·e^(−(k/kc)²) as a·exp(−γ/2·ln(k² + k0²) − (k/kc)²): one log and one exp per mode
  // instead of a pow and an exp (the pass ran 2.3% of a 256² fit with pow)
  const taper = taperK === null ? 0 : 1 / (taperK * taperK);
  for (let i = 0; i < k.length; i++) {
    const k2 = k[i]! * k[i]!;
    out[i] = p.amplitude * Math.exp(half * Math.log(k2 + k02) - k2 * taper);
  }
  out[0] = 0;
  return out;
}

/**
 * Binned power of the MAP modes φ̂ (Hartley coefficients of φ − μ) with the posterior variances added,
 * in logarithmic bins from the lowest non-zero k to `kMax`.
 */
export function binnedPower(
  k: ModeGrid,
  phiHat: ModeGrid,
  prior: ModeGrid,
  transferPower: ModeGrid,
  kappa: number,
  kMax: number,
  binsPerOctave = 3,
): BinnedPower {
  let kMin = Infinity;
  for (let i = 1; i < k.length; i++) if (k[i]! > 0 && k[i]! < kMin) kMin = k[i]!;
  const logMin = Math.log2(kMin) - 1e-9;
  const nBins = Math.max(1, Math.ceil((Math.log2(kMax) - logMin) * binsPerOctave));
  const sum = new Float64Array(nBins);
  const sumMap = new Float64Array(nBins);
  const sumK = new Float64Array(nBins);
  const count = new Float64Array(nBins);
  const info = new Float64Array(nBins);
  for (let i = 1; i < k.length; i++) {
    const ki = k[i]!;
    if (ki > kMax || !(prior[i]! > 0)) continue;
    const b = Math.min(nBins - 1, Math.floor((Math.log2(ki) - logMin) * binsPerOctave));
    const d = 1 / (1 / prior[i]! + transferPower[i]! * kappa);
    info[b] = info[b]! + (1 - d / prior[i]!);
    const m = phiHat[i]! * phiHat[i]!;
    sum[b] = sum[b]! + m + d;
    sumMap[b] = sumMap[b]! + m;
    sumK[b] = sumK[b]! + ki;
    count[b] = count[b]! + 1;
  }
  const out: BinnedPower = { k: [], power: [], mapPower: [], modes: [], information: [] };
  for (let b = 0; b < nBins; b++) {
    if (count[b]! === 0) continue;
    out.k.push(sumK[b]! / count[b]!);
    out.power.push(sum[b]! / count[b]!);
    out.mapPower.push(sumMap[b]! / count[b]!);
    out.modes.push(count[b]!);
    out.information.push(info[b]!);
  }
  return out;
}

/**
 * Weighted least-squares fit of log P = log a − (γ/2) log(k² + k0²) to binned power, γ clamped to
 * [slopeMin, slopeMax] (then a is refitted with γ fixed). Weights: the information per bin (see above).
 */
export function fitPowerLaw(
  binned: BinnedPower,
  turnover: number,
  slopeMin: number,
  slopeMax: number,
): SpectrumParameters {
  const xs = binned.k.map((k) => -0.5 * Math.log(k * k + turnover * turnover));
  const ys = binned.power.map((p) => Math.log(p));
  const ws = binned.information;
  let sw = 0;
  let sx = 0;
  let sy = 0;
  for (let i = 0; i < xs.length; i++) {
    sw += ws[i]!;
    sx += ws[i]! * xs[i]!;
    sy += ws[i]! * ys[i]!;
  }
  const mx = sx / sw;
  const my = sy / sw;
  let sxx = 0;
  let sxy = 0;
  for (let i = 0; i < xs.length; i++) {
    sxx += ws[i]! * (xs[i]! - mx) ** 2;
    sxy += ws[i]! * (xs[i]! - mx) * (ys[i]! - my);
  }
  let slope = sxx > 0 ? sxy / sxx : (slopeMin + slopeMax) / 2;
  slope = Math.min(slopeMax, Math.max(slopeMin, slope));
  const logA = my - slope * mx;
  return { amplitude: Math.exp(logA), slope, turnover };
}
