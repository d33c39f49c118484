/**
 * Brightness units of the images of a joint fit, and the factor that converts one image's values into another's.
 *
 * A pixel value is (flux falling on the pixel, in the base unit) × K, with K set by what the unit is per
 * (FITS Standard 4.0, section 4.3 and its table of units; BUNIT strings as commonly written):
 *   per beam  ("Jy/beam", "Jy beam-1"):  K = beam area in pixels (a point of flux S sums to S·A over the pixels);
 *   per pixel ("Jy/pixel") or nothing per (counts, ADU, electrons):  K = 1;
 *   per steradian ("MJy/sr") or a brightness temperature ("K"):  K = 1/Ω_pixel (sr), since the pixel's flux is
 *   the surface brightness times its solid angle (for kelvin up to a constant common to the images, which is
 *   only valid when they share the observing frequency; the caller is told so).
 * Metric prefixes (µ, m, k, M, G) on Jy are converted; other base units must agree exactly.
 * The gain of image i relative to the reference: g_i = (K_i / scale_i) / (K_ref / scale_ref), scale the
 * prefix factor (mJy → 10⁻³).
 */

export type SolidAngleKind = 'beam' | 'pixel' | 'steradian';

export interface ParsedUnit {
  /** The unit as written ('' when absent). */
  text: string;
  /** Base unit, normalised (e.g. 'Jy', 'K', 'counts'); '' when the image has no unit. */
  base: string;
  /** Value of one unit in the base unit (mJy → 1e−3). */
  scale: number;
  per: SolidAngleKind;
}

const PREFIX: Record<string, number> = { µ: 1e-6, μ: 1e-6, u: 1e-6, m: 1e-3, '': 1, k: 1e3, M: 1e6, G: 1e9 };
const COUNT_WORDS = /^(counts?|cts|ct|adu|dn|electrons?|e-|photons?|ph)$/i;

/** Parses a BUNIT string. Throws on a unit it cannot read. */
export function parseBrightnessUnit(text: string | null | undefined): ParsedUnit {
  const raw = (text ?? '').trim();
  if (raw === '') return { text: '', base: '', scale: 1, per: 'pixel' };
  let rest = raw;
  let per: SolidAngleKind = 'pixel';
  const perPatterns: [RegExp, SolidAngleKind][] = [
    [/\s*(\/\s*beam|\s+beam\s*(\*\*|\^)?\s*-1|\.beam-1)$/i, 'beam'],
    [/\s*(\/\s*(pixel|pix)|\s+(pixel|pix)\s*(\*\*|\^)?\s*-1)$/i, 'pixel'],
    [/\s*(\/\s*sr|\s+sr\s*(\*\*|\^)?\s*-1)$/i, 'steradian'],
  ];
  for (const [pattern, kind] of perPatterns) {
    if (pattern.test(rest)) {
      rest = rest.replace(pattern, '').trim();
      per = kind;
      break;
    }
  }
  // Flux densities in jansky with a metric prefix (case kept for the prefix: m is milli, M is mega).
  const jy = /^(µ|μ|u|m|k|M|G)?(Jy|JY|jy)$/.exec(rest);
  if (jy) return { text: raw, base: 'Jy', scale: PREFIX[jy[1] ?? '']!, per };
  if (/^(K|kelvin)$/i.test(rest) && per === 'pixel')
    return { text: raw, base: 'K', scale: 1, per: 'steradian' };
  if (/^(mK)$/.test(rest) && per === 'pixel') return { text: raw, base: 'K', scale: 1e-3, per: 'steradian' };
  if (COUNT_WORDS.test(rest)) return { text: raw, base: 'counts', scale: 1, per };
  if (/^[A-Za-z][A-Za-z0-9 ./*^-]*$/.test(rest)) return { text: raw, base: rest, scale: 1, per };
  throw new Error(`Cannot read the brightness unit "${raw}"`);
}

export interface UnitGeometry {
  unit: ParsedUnit;
  /** Beam (PSF) area in the image's own pixels: Σ of a unit-peak PSF. */
  beamAreaPx: number;
  /** Pixel solid angle in steradians. */
  pixelSteradian: number;
}

/** K / scale of one image: converts flux in the base unit per pixel into the image's values. */
function valuePerFlux(g: UnitGeometry): number {
  const k = g.unit.per === 'beam' ? g.beamAreaPx : g.unit.per === 'steradian' ? 1 / g.pixelSteradian : 1;
  return k / g.unit.scale;
}

/**
 * Gains of every image relative to the first (the reference), or an Error that says which units cannot be
 * reconciled. Images without a unit are accepted only when none has one (they are then taken to share it).
 */
export function unitGains(images: UnitGeometry[], names: string[]): { gains: number[]; warnings: string[] } {
  const warnings: string[] = [];
  const withUnit = images.filter((g) => g.unit.base !== '').length;
  if (withUnit > 0 && withUnit < images.length) {
    const missing = images.findIndex((g) => g.unit.base === '');
    const known = images.findIndex((g) => g.unit.base !== '');
    throw new Error(
      `Cannot reconcile the units: ${names[missing]} has no BUNIT while ${names[known]} is in "${images[known]!.unit.text}"; give its unit`,
    );
  }
  if (withUnit === 0) warnings.push('No image has a BUNIT: they are taken to be in the same unit per pixel');
  const ref = images[0]!;
  for (let i = 1; i < images.length; i++) {
    const g = images[i]!;
    if (g.unit.base !== ref.unit.base) {
      throw new Error(
        `Cannot reconcile the units "${ref.unit.text}" (${names[0]}) and "${g.unit.text}" (${names[i]}): a joint fit needs the same kind of quantity (e.g. Jy/beam with mJy/beam or Jy/pixel)`,
      );
    }
  }
  if (ref.unit.base === 'K' && images.length > 1) {
    warnings.push(
      'Brightness temperatures are compared as surface brightness: valid only for images at the same frequency',
    );
  }
  const refValue = valuePerFlux(ref);
  return { gains: images.map((g) => valuePerFlux(g) / refValue), warnings };
}
