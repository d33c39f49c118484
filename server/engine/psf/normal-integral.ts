/**
 * The complementary error function and Gaussian interval probabilities, to about 1e-14 relative accuracy.
 *
 * Method: for |x| < 2 the everywhere-positive series
 *   erf(x) = (2/√π) e^(−x²) Σ_{n≥0} 2ⁿ x^(2n+1) / (1·3·5···(2n+1))
 * (Abramowitz & Stegun 7.1.6), which has no cancellation; for x ≥ 2 the continued fraction
 *   erfc(x) = (e^(−x²)/√π) · 1/(x + (1/2)/(x + 1/(x + (3/2)/(x + 2/(x + …)))))
 * (A&S 7.1.14), evaluated by the modified Lentz method (Numerical Recipes §5.2).
 * Speed: PSF stamps call erfc thousands of times, so for 0 ≤ x < 8 the scaled function g(x) = e^(x²) erfc(x)
 * (smooth and slowly varying) is tabulated at module load from the series/continued fraction every 1/64 with its
 * first two derivatives, g' = 2x g − 2/√π and g'' = 2g + 2x g', and interpolated by quintic Hermite polynomials
 * (error ~ h⁶ g⁽⁶⁾/46080 < 1e-13 relative); then erfc = e^(−x²) g. Checked in the tests against
 * @stdlib/math-base-special-erfc.
 */

const TWO_OVER_SQRT_PI = 2 / Math.sqrt(Math.PI);
const ONE_OVER_SQRT_PI = 1 / Math.sqrt(Math.PI);
const SQRT_HALF = Math.SQRT1_2;
const ONE_OVER_SQRT_TWO_PI = 1 / Math.sqrt(2 * Math.PI);

function erfSeries(signedX: number): number {
  // odd function: sum the all-positive series at |x|
  const x = Math.abs(signedX);
  const x2 = x * x;
  let term = x;
  let sum = x;
  for (let n = 0; n < 200; n++) {
    term *= (2 * x2) / (2 * n + 3);
    sum += term;
    if (term < 1e-17 * sum) break;
  }
  return Math.sign(signedX) * TWO_OVER_SQRT_PI * Math.exp(-x2) * sum;
}

function erfcContinuedFraction(x: number): number {
  // f = x + a1/(x + a2/(x + …)), a_k = k/2; Lentz's method on b_k = x, a_k = k/2.
  const tiny = 1e-300;
  let f = x;
  let c = x;
  let d = 0;
  for (let k = 1; k < 500; k++) {
    const a = k / 2;
    d = x + a * d;
    d = Math.abs(d) < tiny ? tiny : d;
    c = x + a / c;
    c = Math.abs(c) < tiny ? tiny : c;
    d = 1 / d;
    const delta = c * d;
    f *= delta;
    if (Math.abs(delta - 1) < 1e-16) break;
  }
  return (ONE_OVER_SQRT_PI * Math.exp(-x * x)) / f;
}

/** erfc(x) by the series or the continued fraction (slow, accurate; builds the table). */
function erfcDirect(x: number): number {
  if (Number.isNaN(x)) return NaN;
  if (x >= 2) return x > 27 ? 0 : erfcContinuedFraction(x);
  if (x > -2) return 1 - erfSeries(x);
  return x < -27 ? 2 : 2 - erfcContinuedFraction(-x);
}

const TABLE_STEP = 1 / 64;
const TABLE_END = 8;
const TABLE_SIZE = TABLE_END / TABLE_STEP + 1;
const scaledValue = new Float64Array(TABLE_SIZE);
const scaledFirst = new Float64Array(TABLE_SIZE);
const scaledSecond = new Float64Array(TABLE_SIZE);
for (let i = 0; i < TABLE_SIZE; i++) {
  const x = i * TABLE_STEP;
  const g = Math.exp(x * x) * erfcDirect(x);
  const g1 = 2 * x * g - TWO_OVER_SQRT_PI;
  scaledValue[i] = g;
  scaledFirst[i] = g1;
  scaledSecond[i] = 2 * g + 2 * x * g1;
}

/** e^(x²) erfc(x) for 0 ≤ x < TABLE_END by quintic Hermite interpolation of the table. */
function scaledErfc(x: number): number {
  const u = x / TABLE_STEP;
  const i = Math.min(Math.floor(u), TABLE_SIZE - 2);
  const t = u - i;
  const h = TABLE_STEP;
  const t2 = t * t;
  const t3 = t2 * t;
  const t4 = t3 * t;
  const t5 = t4 * t;
  const h0 = 1 - 10 * t3 + 15 * t4 - 6 * t5;
  const h1 = t - 6 * t3 + 8 * t4 - 3 * t5;
  const h2 = 0.5 * (t2 - 3 * t3 + 3 * t4 - t5);
  const h3 = 0.5 * (t3 - 2 * t4 + t5);
  const h4 = -4 * t3 + 7 * t4 - 3 * t5;
  const h5 = 10 * t3 - 15 * t4 + 6 * t5;
  return (
    (scaledValue[i] as number) * h0 +
    h * (scaledFirst[i] as number) * h1 +
    h * h * (scaledSecond[i] as number) * h2 +
    h * h * (scaledSecond[i + 1] as number) * h3 +
    h * (scaledFirst[i + 1] as number) * h4 +
    (scaledValue[i + 1] as number) * h5
  );
}

/** erfc(x) = 1 − erf(x). */
export function erfc(x: number): number {
  if (Number.isNaN(x)) return NaN;
  const a = Math.abs(x);
  const upper = a < TABLE_END ? Math.exp(-a * a) * scaledErfc(a) : a > 27 ? 0 : erfcContinuedFraction(a);
  return x >= 0 ? upper : 2 - upper;
}

/** Upper tail of the standard normal, Q(z) = P(Z > z) = erfc(z/√2)/2, accurate in both tails. */
export function normalUpperTail(z: number): number {
  return 0.5 * erfc(z * SQRT_HALF);
}

/**
 * Upper tail Q(|z|) and density φ(z) together, sharing one exponential: with a = |z|/√2,
 * Q(|z|) = ½ e^(−a²) g(a) and φ(z) = e^(−z²/2)/√(2π), and e^(−a²) = e^(−z²/2). Writes [Q(|z|), φ(z)] to `out`.
 */
export function tailAndDensity(z: number, out: Float64Array): void {
  const e = Math.exp(-0.5 * z * z);
  const a = Math.abs(z) * SQRT_HALF;
  out[0] = a < TABLE_END ? 0.5 * e * scaledErfc(a) : normalUpperTail(Math.abs(z));
  out[1] = ONE_OVER_SQRT_TWO_PI * e;
}

/** The direct (untabulated) erfc, exported for the tests. */
export const erfcUntabulated = erfcDirect;

/** P(a < Z < b) for a standard normal Z, without cancellation when both limits lie in the same tail. */
export function normalInterval(a: number, b: number): number {
  if (a >= 0) return normalUpperTail(a) - normalUpperTail(b);
  if (b <= 0) return normalUpperTail(-b) - normalUpperTail(-a);
  return 1 - normalUpperTail(-a) - normalUpperTail(b);
}

/** The standard normal density φ(z). */
export function normalDensity(z: number): number {
  return ONE_OVER_SQRT_TWO_PI * Math.exp(-0.5 * z * z);
}
