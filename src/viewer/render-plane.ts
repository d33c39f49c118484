/**
 * Paints a float32 plane into RGBA bytes (the layout of a canvas ImageData): stretch each value to [0, 1],
 * look it up in a colour map, and paint blank pixels (NaN, ±∞, or mask ≠ 0) in one neutral colour that no
 * map uses at full opacity. Planes are stored FITS-style with row 0 at the bottom; ImageData has row 0 at the
 * top, so rows are flipped.
 * Speed: the curve is tabulated once at 65 536 evenly spaced t in [0, 1] (an error below half a colour-map step
 * for the steepest default curve, log with a = 1000: slope 1000/ln 1001 ≈ 145 at t = 0, so Δs ≤ 145/131 070 ≈ 0.0011
 * < 0.5/255), so a pixel costs one subtraction, one multiplication and two table reads.
 */
import { COLOUR_MAP_SIZE, colourMapTable, type ColourMapName } from './colour-maps';
import type { Stretch } from './stretch';

/** Blank pixels: a neutral mid grey, half transparent so the page background shows through. */
const CURVE_LEVELS = 65536;

export const BLANK_RGBA: readonly [number, number, number, number] = [128, 128, 128, 96];

export interface PlaneRaster {
  width: number;
  height: number;
  /** width × height, row-major, row 0 = bottom. */
  data: Float32Array;
}

/**
 * Writes width × height × 4 bytes into `out` (caller-supplied, e.g. ImageData.data) and returns it.
 */
export function paintPlane(
  plane: PlaneRaster,
  stretch: Stretch,
  colourMap: ColourMapName,
  out: Uint8ClampedArray,
  mask?: Uint8Array | null,
): Uint8ClampedArray {
  const { width, height, data } = plane;
  if (data.length !== width * height) {
    throw new RangeError(`The plane has ${data.length} values, expected ${width}×${height}.`);
  }
  if (out.length !== width * height * 4) {
    throw new RangeError(`The output has ${out.length} bytes, expected ${width * height * 4}.`);
  }
  if (mask && mask.length !== data.length) {
    throw new RangeError(`The mask has ${mask.length} entries but the plane has ${data.length} pixels.`);
  }
  const table = colourMapTable(colourMap);
  const top = COLOUR_MAP_SIZE - 1;
  const levels = CURVE_LEVELS - 1;
  const entries = new Uint16Array(CURVE_LEVELS);
  for (let k = 0; k < CURVE_LEVELS; k++) entries[k] = 3 * Math.round(stretch.curve(k / levels) * top);
  const { lower, upper } = stretch.limits;
  const toLevel = levels / (upper - lower);
  for (let row = 0; row < height; row++) {
    const source = row * width;
    let target = (height - 1 - row) * width * 4;
    for (let x = 0; x < width; x++, target += 4) {
      const v = data[source + x]!;
      if ((mask && mask[source + x]) || !Number.isFinite(v)) {
        out[target] = BLANK_RGBA[0];
        out[target + 1] = BLANK_RGBA[1];
        out[target + 2] = BLANK_RGBA[2];
        out[target + 3] = BLANK_RGBA[3];
        continue;
      }
      const level = (v - lower) * toLevel;
      const entry = entries[level <= 0 ? 0 : level >= levels ? levels : Math.round(level)]!;
      out[target] = table[entry]!;
      out[target + 1] = table[entry + 1]!;
      out[target + 2] = table[entry + 2]!;
      out[target + 3] = 255;
    }
  }
  return out;
}
