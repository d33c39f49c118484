/**
 * Skysieve's colour maps: 256-entry RGB lookup tables designed in CIE LCh (lightness, chroma, hue of CIELAB).
 * Each map is a few control points; between them L*, C* and h are interpolated linearly, with L* rising
 * evenly from the first entry to the last, so that equal steps in the stretched value look like equal steps in
 * lightness. Where a (L*, C*, h) lies outside the sRGB gamut, the chroma is reduced (bisection) until it fits,
 * which keeps L* and the hue; 8-bit rounding is guarded so L* still rises strictly. tests/client/viewer/colour-maps.test.ts recomputes L* from the 8-bit tables.
 * The designs and their names are Skysieve's own.
 */
import { labToLinearRgb, linearToSrgb, srgb8ToLab } from './colour-science';

export type ColourMapName = 'grey' | 'ember' | 'tidepool' | 'heather' | 'frost' | DivergingColourMapName;
export const COLOUR_MAP_NAMES: readonly ColourMapName[] = ['grey', 'ember', 'tidepool', 'heather', 'frost'];
export const COLOUR_MAP_LABELS: Record<ColourMapName, string> = {
  grey: 'Grey',
  ember: 'Ember',
  tidepool: 'Tidepool',
  heather: 'Heather',
  frost: 'Frost',
  seesaw: 'Seesaw (diverging)',
};

/**
 * Diverging maps, for signed values centred on zero (differences, residuals): L* rises from both ends to a
 * near-neutral light centre, so equal |values| of either sign look equally strong; the two halves differ in hue.
 * They are not in COLOUR_MAP_NAMES (whose maps all rise in lightness); a viewer offers them where asked to.
 */
export type DivergingColourMapName = 'seesaw';
export const DIVERGING_COLOUR_MAP_NAMES: readonly DivergingColourMapName[] = ['seesaw'];

export const COLOUR_MAP_SIZE = 256;

/** A control point: position in [0, 1], chroma C* and hue h in degrees (unwrapped: may exceed 360). */
interface ControlPoint {
  at: number;
  chroma: number;
  hue: number;
}

interface Design {
  lightness: [number, number];
  points: ControlPoint[];
}

const DESIGNS: Record<Exclude<ColourMapName, 'grey' | DivergingColourMapName>, Design> = {
  // Deep violet-brown through red and orange to a pale straw white.
  ember: {
    lightness: [6, 97],
    points: [
      { at: 0, chroma: 25, hue: 320 },
      { at: 0.35, chroma: 70, hue: 390 },
      { at: 0.7, chroma: 75, hue: 430 },
      { at: 1, chroma: 18, hue: 455 },
    ],
  },
  // Ink blue through sea green to a pale lime.
  tidepool: {
    lightness: [8, 96],
    points: [
      { at: 0, chroma: 30, hue: 285 },
      { at: 0.4, chroma: 38, hue: 215 },
      { at: 0.75, chroma: 55, hue: 150 },
      { at: 1, chroma: 25, hue: 110 },
    ],
  },
  // Dark plum through magenta and rose to a pale peach.
  heather: {
    lightness: [7, 96],
    points: [
      { at: 0, chroma: 30, hue: 300 },
      { at: 0.45, chroma: 60, hue: 340 },
      { at: 0.8, chroma: 50, hue: 385 },
      { at: 1, chroma: 15, hue: 420 },
    ],
  },
  // A single cool blue hue, strongest in the middle.
  frost: {
    lightness: [5, 98],
    points: [
      { at: 0, chroma: 12, hue: 265 },
      { at: 0.5, chroma: 40, hue: 250 },
      { at: 1, chroma: 6, hue: 230 },
    ],
  },
};

function interpolate(points: ControlPoint[], t: number): { chroma: number; hue: number } {
  for (let k = 1; k < points.length; k++) {
    const a = points[k - 1]!;
    const b = points[k]!;
    if (t <= b.at || k === points.length - 1) {
      const w = b.at > a.at ? Math.min(1, Math.max(0, (t - a.at) / (b.at - a.at))) : 0;
      return { chroma: a.chroma + w * (b.chroma - a.chroma), hue: a.hue + w * (b.hue - a.hue) };
    }
  }
  const only = points[0]!;
  return { chroma: only.chroma, hue: only.hue };
}

function inGamut(rgb: [number, number, number]): boolean {
  return rgb.every((c) => c >= -1e-9 && c <= 1 + 1e-9);
}

/** The 8-bit sRGB colour of (L*, C*, h), with the chroma reduced until it fits the gamut. */
function lchToSrgb8(L: number, chroma: number, hueDeg: number): [number, number, number] {
  const h = (hueDeg * Math.PI) / 180;
  const at = (c: number) => labToLinearRgb(L, c * Math.cos(h), c * Math.sin(h));
  let rgb = at(chroma);
  if (!inGamut(rgb)) {
    let lo = 0;
    let hi = chroma;
    for (let i = 0; i < 30; i++) {
      const mid = (lo + hi) / 2;
      if (inGamut(at(mid))) lo = mid;
      else hi = mid;
    }
    rgb = at(lo);
  }
  return rgb.map((c) => Math.round(255 * linearToSrgb(Math.min(1, Math.max(0, c))))) as [
    number,
    number,
    number,
  ];
}

/**
 * Rounding to 8 bits can leave two neighbouring dark entries with the same L* (blue carries little lightness).
 * Raise the green channel (the largest share of luminance) one step at a time until the entry is lighter.
 */
function aboveLightness(rgb: [number, number, number], previous: Uint8Array): [number, number, number] {
  const before = srgb8ToLab(previous[0]!, previous[1]!, previous[2]!)[0];
  const out: [number, number, number] = [...rgb];
  while (srgb8ToLab(...out)[0] <= before && out[1] < 255) out[1] += 1;
  return out;
}

/**
 * Seesaw: steel blue (h 255°) below the centre, brick red (h 35°) above; L* runs linearly from 38 at either end
 * to 97 at the centre, and C* from 48 at the ends to 0 at the centre, so the middle entry is a light neutral grey.
 * Entries i and 255 − i have the same L* (before 8-bit rounding).
 */
function buildDiverging(): Uint8Array {
  const table = new Uint8Array(COLOUR_MAP_SIZE * 3);
  for (let i = 0; i < COLOUR_MAP_SIZE; i++) {
    const t = i / (COLOUR_MAP_SIZE - 1);
    const fromCentre = Math.abs(2 * t - 1);
    const L = 97 - fromCentre * (97 - 38);
    table.set(lchToSrgb8(L, 48 * fromCentre, t < 0.5 ? 255 : 35), 3 * i);
  }
  return table;
}

function build(name: ColourMapName): Uint8Array {
  if (name === 'seesaw') return buildDiverging();
  const table = new Uint8Array(COLOUR_MAP_SIZE * 3);
  for (let i = 0; i < COLOUR_MAP_SIZE; i++) {
    const t = i / (COLOUR_MAP_SIZE - 1);
    let rgb: [number, number, number];
    if (name === 'grey') {
      const v = Math.round(255 * t);
      rgb = [v, v, v];
    } else {
      const design = DESIGNS[name];
      const L = design.lightness[0] + t * (design.lightness[1] - design.lightness[0]);
      const { chroma, hue } = interpolate(design.points, t);
      rgb = lchToSrgb8(L, chroma, hue);
    }
    if (i > 0) rgb = aboveLightness(rgb, table.subarray(3 * i - 3, 3 * i));
    table.set(rgb, 3 * i);
  }
  return table;
}

const cache = new Map<ColourMapName, Uint8Array>();

/** RGB lookup table of a map: COLOUR_MAP_SIZE × [r, g, b], 8-bit sRGB. Built once, then shared (do not write). */
export function colourMapTable(name: ColourMapName): Uint8Array {
  if (!COLOUR_MAP_NAMES.includes(name) && !(DIVERGING_COLOUR_MAP_NAMES as readonly string[]).includes(name))
    throw new RangeError(`Unknown colour map "${name}".`);
  let table = cache.get(name);
  if (!table) {
    table = build(name);
    cache.set(name, table);
  }
  return table;
}

/** CSS linear-gradient of a map, for swatches in the controls. */
export function colourMapGradient(name: ColourMapName, stops = 9): string {
  const table = colourMapTable(name);
  const parts: string[] = [];
  for (let k = 0; k < stops; k++) {
    const i = Math.round((k / (stops - 1)) * (COLOUR_MAP_SIZE - 1));
    parts.push(`rgb(${table[3 * i]}, ${table[3 * i + 1]}, ${table[3 * i + 2]})`);
  }
  return `linear-gradient(to right, ${parts.join(', ')})`;
}
