/**
 * Numbers behind the run page's fit checks (FitChecksPanel.vue): the unit normal that the normalised residuals
 * of a good fit follow, the diffuse power spectrum's points with their scatter, and the histogram of the
 * catalogue's fluxes in log₁₀. Pure functions; no Vue or Plotly.
 *
 * erfc: the Chebyshev-fitted approximation `erfcc` of Press, Teukolsky, Vetterling & Flannery, Numerical Recipes
 * in C, 2nd ed. (1992), §6.2, with fractional error below 1.2 × 10⁻⁷ everywhere, so that the far tails keep
 * their relative accuracy (1 − erf would lose it to cancellation).
 * Normal CDF: Φ(x) = ½ erfc(−x/√2) (Abramowitz & Stegun 1964, Handbook of Mathematical Functions, 26.2.29 with
 * 7.1.2). A bin [a, b) of a unit normal holds the probability Φ(b) − Φ(a); above zero it is computed as
 * Q(a) − Q(b) with Q(x) = ½ erfc(x/√2) = 1 − Φ(x), again to keep the tails accurate.
 */

/** Complementary error function (Numerical Recipes §6.2 `erfcc`, fractional error < 1.2e-7). */
export function erfc(x: number): number {
  if (Number.isNaN(x)) return NaN;
  const z = Math.abs(x);
  const t = 1 / (1 + 0.5 * z);
  const ans =
    t *
    Math.exp(
      -z * z -
        1.26551223 +
        t *
          (1.00002368 +
            t *
              (0.37409196 +
                t *
                  (0.09678418 +
                    t *
                      (-0.18628806 +
                        t *
                          (0.27886807 +
                            t * (-1.13520398 + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277)))))))),
    );
  return x >= 0 ? ans : 2 - ans;
}

export const erf = (x: number): number => 1 - erfc(x);

/** Φ(x), the unit normal's cumulative distribution (A&S 26.2.29). */
export const normalCdf = (x: number): number => 0.5 * erfc(-x / Math.SQRT2);

/** Probability that a unit normal value falls in [a, b) (a ≤ b; ±Infinity allowed). */
export function normalProbability(a: number, b: number): number {
  if (!(b >= a)) throw new RangeError(`A bin must not end (${b}) before it starts (${a}).`);
  if (a >= 0) return 0.5 * (erfc(a / Math.SQRT2) - erfc(b / Math.SQRT2));
  if (b <= 0) return 0.5 * (erfc(-b / Math.SQRT2) - erfc(-a / Math.SQRT2));
  return normalCdf(b) - normalCdf(a);
}

/**
 * Expected counts per bin of `total` unit-normal values. With `openEnds` (the server's residual histogram puts
 * values beyond its outer edges into the end bins) the first bin reaches down to −∞ and the last up to +∞.
 */
export function expectedNormalCounts(edges: readonly number[], total: number, openEnds = true): number[] {
  if (edges.length < 2) throw new RangeError('A histogram needs at least two bin edges.');
  const last = edges.length - 2;
  return edges.slice(0, -1).map((lower, i) => {
    const a = openEnds && i === 0 ? -Infinity : lower;
    const b = openEnds && i === last ? Infinity : edges[i + 1]!;
    return total * normalProbability(a, b);
  });
}

/**
 * Share of the counted values beyond ±limit, from bins whose edges include ±limit exactly (else null), and
 * the share a unit normal puts there, 2 Q(limit).
 */
export function tailShare(
  edges: readonly number[],
  counts: readonly number[],
  limit: number,
): { observed: number; expected: number } | null {
  const lowerIndex = edges.indexOf(-limit);
  const upperIndex = edges.indexOf(limit);
  const total = counts.reduce((a, b) => a + b, 0);
  if (lowerIndex < 0 || upperIndex < 0 || total === 0) return null;
  let beyond = 0;
  for (let i = 0; i < counts.length; i++) if (i < lowerIndex || i >= upperIndex) beyond += counts[i]!;
  return { observed: beyond / total, expected: erfc(limit / Math.SQRT2) };
}

export interface SpectrumPoint {
  k: number;
  power: number;
  /** 1σ scatter of the bin mean from the modes' own variance: P √(2/modes). */
  error: number;
  modes: number;
  fitted: number;
}

/**
 * The spectrum bins that a log–log plot can show (k > 0, power > 0). Each binned power is a mean over `modes`
 * real Gaussian modes, whose squares scatter with variance 2P² (a χ² with one degree of freedom), so the mean
 * scatters by P √(2/modes); the estimate's own posterior variance is already inside `power`.
 */
export function spectrumPoints(spectrum: {
  k: readonly number[];
  power: readonly number[];
  modes: readonly number[];
  fitted: readonly number[];
}): SpectrumPoint[] {
  const out: SpectrumPoint[] = [];
  spectrum.k.forEach((k, i) => {
    const power = spectrum.power[i]!;
    const modes = spectrum.modes[i] ?? 0;
    if (!(k > 0) || !(power > 0) || !Number.isFinite(power)) return;
    out.push({
      k,
      power,
      error: modes > 0 ? power * Math.sqrt(2 / modes) : NaN,
      modes,
      fitted: spectrum.fitted[i] ?? NaN,
    });
  });
  return out;
}

export interface LogHistogram {
  /** Bin edges in log₁₀ of the value. */
  edges: number[];
  counts: number[];
  /** Values left out: zero, negative or not finite (no logarithm). */
  excluded: number;
}

/** Histogram of log₁₀ of the positive values, in bins of `binWidthDex` aligned on multiples of it. */
export function logHistogram(values: readonly number[], binWidthDex = 0.1): LogHistogram {
  if (!(binWidthDex > 0)) throw new RangeError(`The bin width must be positive, got ${binWidthDex}.`);
  const logs: number[] = [];
  let excluded = 0;
  for (const v of values) {
    if (v > 0 && Number.isFinite(v)) logs.push(Math.log10(v));
    else excluded++;
  }
  if (logs.length === 0) return { edges: [], counts: [], excluded };
  const binOf = (x: number) => Math.floor(x / binWidthDex + 1e-9);
  let first = Infinity;
  let last = -Infinity;
  for (const x of logs) {
    first = Math.min(first, binOf(x));
    last = Math.max(last, binOf(x));
  }
  const counts = new Array<number>(last - first + 1).fill(0);
  for (const x of logs) counts[binOf(x) - first]!++;
  const edges = Array.from({ length: counts.length + 1 }, (_, i) => (first + i) * binWidthDex);
  return { edges, counts, excluded };
}
