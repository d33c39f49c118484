/**
 * Differential source counts dN/dS: the number of sources per unit flux per unit solid angle, per flux bin,
 * with Poisson error bars, and optionally corrected for incompleteness.
 *
 *   dN/dS (bin k) = n_k / (ΔS_k · Ω),   Ω in sr (and deg², 1 sr = (180/π)² deg²).
 * The Euclidean-normalised form S^2.5 · dN/dS (at the bin's geometric-mean flux) is given too, since a static
 * Euclidean universe gives a flat line in it — the usual way the counts are plotted.
 *
 * Error bars: 1σ-equivalent (84.13 % one-sided) Poisson confidence limits on n from the approximations of
 * N. Gehrels, "Confidence limits for small numbers of events in astrophysical data", ApJ 303, 336 (1986):
 *   upper  λ_u ≈ n + √(n + 3/4) + 1                        (eq. 7 with S = 1)
 *   lower  λ_l ≈ n (1 − 1/(9n) − 1/(3√n))³, λ_l(0) = 0      (eq. 12 with S = 1; eq. 14's β term is 0 for S = 1)
 * They hold for every n, small ones included, where √n error bars fail.
 *
 * Completeness correction: each source is weighted by 1/C(S_i), with C interpolated linearly in log S between
 * the measured levels and held at the last value above them; below the faintest measured level C is unknown
 * and no corrected value is given. A bin whose C (at its geometric-mean flux) is below `minimumCompleteness` gets
 * no corrected value either: dividing by a small, uncertain C makes numbers that mislead (the 0.5 default is
 * common practice, not a published rule). The corrected error bars scale the Poisson limits by n_corrected/n;
 * the completeness curve's own uncertainty is not propagated.
 */

export interface CompletenessCurve {
  /** Flux levels, increasing, > 0. */
  flux: readonly number[];
  /** Completeness at each level, 0…1. */
  completeness: readonly number[];
}

export interface NumberCountsOptions {
  /** Bin edges in flux, strictly increasing (n + 1 edges for n bins); sources outside are ignored. */
  binEdges: readonly number[];
  /** Survey solid angle in steradians. */
  areaSr: number;
  /** Measured completeness, for the corrected counts. @default none */
  completeness?: CompletenessCurve;
  /** Bins with C below this get no corrected value. @default 0.5 */
  minimumCompleteness?: number;
}

export interface CountsBin {
  fluxLow: number;
  fluxHigh: number;
  /** Geometric mean of the edges (arithmetic mean if the low edge is ≤ 0). */
  fluxCentre: number;
  count: number;
  /** Gehrels 1986 1σ-equivalent limits on the count. */
  countLow: number;
  countHigh: number;
  perSr: CountsValue;
  perDeg2: CountsValue;
  /** S_centre^2.5 · dN/dS per sr. */
  euclideanPerSr: CountsValue;
  /** Completeness at fluxCentre, null without a curve or where unknown. */
  completeness: number | null;
  /** Completeness-corrected counts; null without a curve, below the measured range or below the minimum. */
  corrected: { count: number; perSr: CountsValue; perDeg2: CountsValue; euclideanPerSr: CountsValue } | null;
  /** Why `corrected` is null, when a curve was given. */
  correctionNote: string | null;
}

export interface CountsValue {
  value: number;
  low: number;
  high: number;
}

export const DEG2_PER_SR = (180 / Math.PI) ** 2;

/** Gehrels (1986) eq. 7, S = 1: approximate 84.13 % upper confidence limit for n observed events. */
export function poissonUpperLimit(n: number): number {
  return n + Math.sqrt(n + 0.75) + 1;
}

/** Gehrels (1986) eq. 12, S = 1: approximate 84.13 % lower confidence limit for n observed events. */
export function poissonLowerLimit(n: number): number {
  if (n <= 0) return 0;
  return n * (1 - 1 / (9 * n) - 1 / (3 * Math.sqrt(n))) ** 3;
}

/** C(S): linear in log S between levels, the last value above, null below the faintest level. */
export function interpolateCompleteness(curve: CompletenessCurve, flux: number): number | null {
  const { flux: levels, completeness } = curve;
  if (levels.length === 0 || !(flux > 0) || flux < levels[0]!) return null;
  if (flux >= levels[levels.length - 1]!) return completeness[completeness.length - 1]!;
  let k = 0;
  while (levels[k + 1]! <= flux) k++;
  const t = Math.log(flux / levels[k]!) / Math.log(levels[k + 1]! / levels[k]!);
  return completeness[k]! + t * (completeness[k + 1]! - completeness[k]!);
}

function checkOptions(options: NumberCountsOptions): Required<Omit<NumberCountsOptions, 'completeness'>> {
  const { binEdges, areaSr } = options;
  if (binEdges.length < 2) throw new Error('Number counts need at least two bin edges.');
  for (let k = 0; k < binEdges.length; k++) {
    if (!Number.isFinite(binEdges[k]!)) throw new Error('Bin edges must be finite numbers.');
    if (k > 0 && !(binEdges[k]! > binEdges[k - 1]!))
      throw new Error('Bin edges must be strictly increasing.');
  }
  if (!(Number.isFinite(areaSr) && areaSr > 0))
    throw new Error('The survey area must be a positive number of steradians.');
  const minimumCompleteness = options.minimumCompleteness ?? 0.5;
  if (!(minimumCompleteness > 0 && minimumCompleteness <= 1)) {
    throw new Error('minimumCompleteness must lie in (0, 1].');
  }
  const curve = options.completeness;
  if (curve) {
    if (curve.flux.length !== curve.completeness.length || curve.flux.length === 0) {
      throw new Error(
        'The completeness curve needs as many completeness values as flux levels (at least one).',
      );
    }
    curve.flux.forEach((level, k) => {
      if (!(level > 0) || (k > 0 && !(level > curve.flux[k - 1]!))) {
        throw new Error('Completeness flux levels must be positive and strictly increasing.');
      }
      const c = curve.completeness[k]!;
      if (!(c >= 0 && c <= 1)) throw new Error(`Completeness ${c} at flux ${level} is outside 0…1.`);
    });
  }
  return { binEdges, areaSr, minimumCompleteness };
}

/** Differential counts of `fluxes` in the given bins (see the file comment). */
export function numberCounts(fluxes: readonly number[], options: NumberCountsOptions): CountsBin[] {
  const { binEdges, areaSr, minimumCompleteness } = checkOptions(options);
  const curve = options.completeness;
  const nBins = binEdges.length - 1;
  const members: number[][] = Array.from({ length: nBins }, () => []);
  for (const flux of fluxes) {
    if (!Number.isFinite(flux) || flux < binEdges[0]! || flux >= binEdges[nBins]!) continue;
    let lo = 0;
    let hi = nBins - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (binEdges[mid]! <= flux) lo = mid;
      else hi = mid - 1;
    }
    members[lo]!.push(flux);
  }
  return members.map((inBin, k): CountsBin => {
    const fluxLow = binEdges[k]!;
    const fluxHigh = binEdges[k + 1]!;
    const fluxCentre = fluxLow > 0 ? Math.sqrt(fluxLow * fluxHigh) : (fluxLow + fluxHigh) / 2;
    const scale = 1 / ((fluxHigh - fluxLow) * areaSr);
    const euclid = fluxCentre > 0 ? fluxCentre ** 2.5 : NaN;
    const n = inBin.length;
    const countLow = poissonLowerLimit(n);
    const countHigh = poissonUpperLimit(n);
    const values = (count: number, low: number, high: number) => {
      const perSr = { value: count * scale, low: low * scale, high: high * scale };
      return {
        perSr,
        perDeg2: {
          value: perSr.value / DEG2_PER_SR,
          low: perSr.low / DEG2_PER_SR,
          high: perSr.high / DEG2_PER_SR,
        },
        euclideanPerSr: { value: perSr.value * euclid, low: perSr.low * euclid, high: perSr.high * euclid },
      };
    };
    const raw = values(n, countLow, countHigh);
    let completeness: number | null = null;
    let corrected: CountsBin['corrected'] = null;
    let correctionNote: string | null = null;
    if (curve) {
      completeness = interpolateCompleteness(curve, fluxCentre);
      const weights = inBin.map((flux) => interpolateCompleteness(curve, flux));
      if (completeness === null || weights.some((c) => c === null)) {
        correctionNote = 'below the faintest injected level: completeness not measured';
      } else if (completeness < minimumCompleteness || weights.some((c) => c! <= 0)) {
        correctionNote = `completeness ${completeness.toFixed(2)} below ${minimumCompleteness}: not corrected`;
      } else {
        const count = n === 0 ? 0 : weights.reduce((sum: number, c) => sum + 1 / c!, 0);
        const ratio = n === 0 ? 1 / completeness : count / n;
        corrected = { count, ...values(count, countLow * ratio, countHigh * ratio) };
      }
    }
    return {
      fluxLow,
      fluxHigh,
      fluxCentre,
      count: n,
      countLow,
      countHigh,
      ...raw,
      completeness,
      corrected,
      correctionNote,
    };
  });
}
