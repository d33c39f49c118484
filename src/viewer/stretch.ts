/**
 * Display stretches: a pixel value v between display limits lo < hi becomes t = (v − lo)/(hi − lo), clipped to
 * [0, 1], and then a brightness s(t) in [0, 1] with s(0) = 0 and s(1) = 1:
 *   linear        s = t
 *   square root   s = √t
 *   logarithmic   s = log(1 + a t) / log(1 + a), a > 0 the contrast (default 1000: common practice, no source)
 *   asinh         s = asinh(t / β) / asinh(1 / β), β > 0 the softening
 * The asinh stretch is the inverse hyperbolic sine of Lupton, Gunn & Szalay (1999), "A Modified Magnitude
 * System that Produces Well-Behaved Magnitudes, Colors, and Errors Even for Low Signal-to-Noise Ratio
 * Measurements", AJ 118, 1406: their magnitude is μ = −(2.5/ln 10)[asinh((f/f0)/(2b)) + ln b], linear in f
 * for f ≪ b and logarithmic for f ≫ b. Here b (as β = 2b in units of the limit range) sets where the linear
 * part turns logarithmic; the division by asinh(1/β) maps the upper limit to 1.
 * Non-finite values return NaN (the caller paints them as blank).
 */

export type StretchName = 'linear' | 'sqrt' | 'log' | 'asinh';
export const STRETCH_NAMES: readonly StretchName[] = ['linear', 'sqrt', 'log', 'asinh'];
export const STRETCH_LABELS: Record<StretchName, string> = {
  linear: 'Linear',
  sqrt: 'Square root',
  log: 'Logarithmic',
  asinh: 'asinh',
};

export interface StretchOptions {
  /** Which curve. @default 'linear' */
  stretch?: StretchName;
  /** Contrast a of the logarithmic stretch. @default 1000 */
  logContrast?: number;
  /** Softening β of the asinh stretch, as a fraction of the limit range. @default 0.1 */
  asinhSoftening?: number;
}

export interface Stretch {
  (value: number): number;
  /** The limits and curve it was built from (lets painters tabulate the curve once). */
  readonly limits: DisplayLimits;
  readonly curve: (t: number) => number;
}

export interface DisplayLimits {
  lower: number;
  upper: number;
}

function checkStretchOptions(options: StretchOptions): Required<StretchOptions> {
  const full = { stretch: 'linear' as StretchName, logContrast: 1000, asinhSoftening: 0.1, ...options };
  if (!STRETCH_NAMES.includes(full.stretch)) throw new RangeError(`Unknown stretch "${full.stretch}".`);
  if (!(full.logContrast > 0) || !Number.isFinite(full.logContrast)) {
    throw new RangeError(`The logarithmic contrast must be a positive number, got ${full.logContrast}.`);
  }
  if (!(full.asinhSoftening > 0) || !Number.isFinite(full.asinhSoftening)) {
    throw new RangeError(`The asinh softening must be a positive number, got ${full.asinhSoftening}.`);
  }
  return full;
}

/** Curve s(t) on [0, 1] for already normalised t. */
export function stretchCurve(options: StretchOptions = {}): (t: number) => number {
  const { stretch, logContrast, asinhSoftening } = checkStretchOptions(options);
  switch (stretch) {
    case 'linear':
      return (t) => t;
    case 'sqrt':
      return (t) => Math.sqrt(t);
    case 'log': {
      const norm = Math.log1p(logContrast);
      return (t) => Math.log1p(logContrast * t) / norm;
    }
    case 'asinh': {
      const norm = Math.asinh(1 / asinhSoftening);
      return (t) => Math.asinh(t / asinhSoftening) / norm;
    }
  }
}

/** Value → brightness in [0, 1] between the limits; NaN for non-finite values. */
export function makeStretch(limits: DisplayLimits, options: StretchOptions = {}): Stretch {
  const { lower, upper } = limits;
  if (!Number.isFinite(lower) || !Number.isFinite(upper)) {
    throw new RangeError(`Display limits must be finite numbers, got ${lower} and ${upper}.`);
  }
  if (!(upper > lower)) {
    throw new RangeError(`The upper display limit (${upper}) must be above the lower one (${lower}).`);
  }
  const curve = stretchCurve(options);
  const range = upper - lower;
  const stretch = (value: number) => {
    if (!Number.isFinite(value)) return NaN;
    const t = (value - lower) / range;
    return curve(t <= 0 ? 0 : t >= 1 ? 1 : t);
  };
  return Object.assign(stretch, { limits: { lower, upper }, curve });
}
