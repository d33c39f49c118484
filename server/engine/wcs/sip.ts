/**
 * SIP distortion polynomials (Shupe et al. 2005, "The SIP Convention for Representing Distortion in FITS Image
 * Headers", ASP Conf. Ser. 347, 491), used with CTYPE 'RA---TAN-SIP' / 'DEC--TAN-SIP':
 *   with u = p1 − CRPIX1, v = p2 − CRPIX2 (pixels relative to the reference pixel),
 *   the corrected offsets are u + f(u, v), v + g(u, v), f = Σ A_p_q u^p v^q, g = Σ B_p_q u^p v^q
 *   (0 ≤ p + q ≤ A_ORDER / B_ORDER), and these go through the CD matrix as usual.
 * The inverse (world → pixel) solves u + f(u, v) = U, v + g(u, v) = V by Newton's method, started from the
 * AP/BP inverse polynomials when present (U + F(U, V), V + G(U, V)) or from (U, V), to 1e-12 pixel.
 */
import type { HeaderCard } from '../io/header-card';

export interface Sip {
  /** Pixel offsets from CRPIX → distorted offsets. */
  distort(u: number, v: number): [number, number];
  /** Distorted offsets → pixel offsets (NaN if Newton's method does not converge). */
  undistort(U: number, V: number): [number, number];
}

type Terms = { p: number; q: number; c: number }[];

function readTerms(header: readonly HeaderCard[], letter: string, order: number): Terms {
  const terms: Terms = [];
  for (const card of header) {
    const match = new RegExp(`^${letter}_(\\d+)_(\\d+)$`).exec(card.keyword);
    if (!match || typeof card.value !== 'number' || card.value === 0) continue;
    const p = Number(match[1]);
    const q = Number(match[2]);
    if (p + q <= order) terms.push({ p, q, c: card.value });
  }
  return terms;
}

function evaluate(terms: Terms, u: number, v: number): number {
  let sum = 0;
  for (const { p, q, c } of terms) sum += c * u ** p * v ** q;
  return sum;
}

/** Partial derivatives of Σ c u^p v^q with respect to u and v. */
function gradient(terms: Terms, u: number, v: number): [number, number] {
  let du = 0;
  let dv = 0;
  for (const { p, q, c } of terms) {
    if (p > 0) du += c * p * u ** (p - 1) * v ** q;
    if (q > 0) dv += c * q * u ** p * v ** (q - 1);
  }
  return [du, dv];
}

/** The SIP polynomials of a header, or null when it has no A_ORDER/B_ORDER. */
export function parseSip(header: readonly HeaderCard[]): Sip | null {
  const number = (key: string): number | undefined => {
    const value = header.find((card) => card.keyword === key)?.value;
    return typeof value === 'number' ? value : undefined;
  };
  const aOrder = number('A_ORDER');
  const bOrder = number('B_ORDER');
  if (aOrder === undefined || bOrder === undefined) return null;
  const a = readTerms(header, 'A', aOrder);
  const b = readTerms(header, 'B', bOrder);
  const apOrder = number('AP_ORDER');
  const bpOrder = number('BP_ORDER');
  const ap = apOrder === undefined ? [] : readTerms(header, 'AP', apOrder);
  const bp = bpOrder === undefined ? [] : readTerms(header, 'BP', bpOrder);
  return {
    distort(u, v) {
      return [u + evaluate(a, u, v), v + evaluate(b, u, v)];
    },
    undistort(U, V) {
      let u = U + evaluate(ap, U, V);
      let v = V + evaluate(bp, U, V);
      for (let iteration = 0; iteration < 50; iteration++) {
        const ru = u + evaluate(a, u, v) - U;
        const rv = v + evaluate(b, u, v) - V;
        if (Math.abs(ru) < 1e-12 && Math.abs(rv) < 1e-12) return [u, v];
        const [fu, fv] = gradient(a, u, v);
        const [gu, gv] = gradient(b, u, v);
        const j11 = 1 + fu;
        const j12 = fv;
        const j21 = gu;
        const j22 = 1 + gv;
        const det = j11 * j22 - j12 * j21;
        if (!Number.isFinite(det) || det === 0) break;
        u -= (j22 * ru - j12 * rv) / det;
        v -= (-j21 * ru + j11 * rv) / det;
      }
      const ru = u + evaluate(a, u, v) - U;
      const rv = v + evaluate(b, u, v) - V;
      return Math.abs(ru) < 1e-9 && Math.abs(rv) < 1e-9 ? [u, v] : [NaN, NaN];
    },
  };
}
