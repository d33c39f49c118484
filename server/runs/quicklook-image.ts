/**
 * The quick-look picture of a run: one plane (the input data or a component) as an RGBA raster with the
 * catalogue's sources drawn as beam-sized ellipses, encoded as PNG.
 *
 * - Size: the longer side is at most `maxSize`. A larger plane is block-averaged by the smallest integer factor f
 *   that fits (images/downsample.ts); a plane under half of `maxSize` is magnified by the largest integer factor
 *   z ≤ 4 that fits, each pixel repeated z × z times (no interpolation: the pixels stay visible as pixels).
 *   One scale s = 1/f or z maps a 0-based pixel centre x to the column (x + 0.5) s − 0.5.
 * - Brightness: display limits at the (100 − clip)/2 and (100 + clip)/2 percentiles of the valid pixels
 *   (clip 99.5 % by default: common practice for display, no source), then the asinh stretch
 *   s = asinh(t / β) / asinh(1 / β) with t the value scaled to [0, 1] between the limits and β = 0.1, after
 *   Lupton, Gunn & Szalay (1999), AJ 118, 1406 (src/viewer/stretch.ts), looked up in one of Skysieve's colour
 *   maps (src/viewer/colour-maps.ts). The viewer's own stretch, limits and painter are reused, so the PNG looks
 *   like the sky viewer.
 * - Signed planes (`signed: true`, for residuals): limits symmetric about zero, ±max(|lower|, |upper|), a linear
 *   stretch so that zero sits at the middle of the map, and by default the diverging map (seesaw).
 * - North up as usually displayed: PNG row 0 is the last image row (FITS y = height).
 * - Markers: each source is an ellipse with the beam's FWHMs as its axes (each semi-axis at least 3 output
 *   pixels so that a marker stays visible on a reduced picture), position angle from +y towards −x
 *   (src/viewer/markers.ts), drawn as a ring about 1.5 output pixels wide in MARKER_RGB, with a darkened pixel on
 *   each side so that it stands out on any part of any map.
 */
import { Jimp } from 'jimp';

import { downsampleMean } from '../images/downsample';
import { type ColourMapName, colourMapTable } from '../../src/viewer/colour-maps';
import { clipLimits, orderStatistics } from '../../src/viewer/limits';
import { majorAxisDirection } from '../../src/viewer/markers';
import { paintPlane } from '../../src/viewer/render-plane';
import { makeStretch } from '../../src/viewer/stretch';

/** The markers' colour: the sky viewer's unselected marker green. */
export const MARKER_RGB: readonly [number, number, number] = [80, 255, 160];
/** Smallest semi-axis of a marker in output pixels. */
export const MIN_MARKER_SEMI_AXIS = 3;
const RING_HALF_WIDTH = 0.75;
/** A darkened band of this width on both sides of the ring keeps it visible on light and green parts of a map. */
const HALO_WIDTH = 1;
const HALO_SHADE = 0.45;
const MAX_ZOOM = 4;

export interface QuicklookPlane {
  width: number;
  height: number;
  /** Row-major, row 0 = FITS y = 1; NaN where blank. */
  data: Float32Array;
  /** Optional, 1 = valid (the image store's convention). */
  mask?: Uint8Array | null;
}

export interface QuicklookSource {
  /** FITS 1-based pixel position. */
  x: number;
  y: number;
}

export interface QuicklookBeam {
  /** FWHM along the major and minor axes, input pixels. */
  majorPx: number;
  minorPx: number;
  /** Degrees from image +y towards −x. */
  paDeg: number;
}

export interface QuicklookOptions {
  /** Longest side of the picture in pixels. @default 1024 */
  maxSize?: number;
  /** @default 'ember', or 'seesaw' for a signed plane */
  colourMap?: ColourMapName;
  /** The plane holds signed values centred on zero (residuals). @default false */
  signed?: boolean;
  /** Central share of the valid values between the display limits, percent. @default 99.5 */
  clipPercent?: number;
}

export interface QuicklookRaster {
  width: number;
  height: number;
  /** RGBA, row 0 = top (north up). */
  rgba: Uint8ClampedArray;
  /** Output pixels per input pixel. */
  scale: number;
  limits: { lower: number; upper: number };
  /** Where each source's marker was centred: output column and row (row 0 = top), 0-based. */
  markerCentres: { column: number; row: number }[];
}

/** Output pixels per input pixel for a width × height plane and a longest side of maxSize. */
export function quicklookScale(width: number, height: number, maxSize: number): number {
  const longest = Math.max(width, height);
  if (longest > maxSize) return 1 / Math.ceil(longest / maxSize);
  return Math.max(1, Math.min(MAX_ZOOM, Math.floor(maxSize / longest)));
}

/** Repeats each pixel z × z times (z a whole number ≥ 1). */
function magnify(data: Float32Array, width: number, height: number, zoom: number): Float32Array {
  if (zoom === 1) return data;
  const outWidth = width * zoom;
  const out = new Float32Array(outWidth * height * zoom);
  for (let y = 0; y < height * zoom; y++) {
    const source = Math.floor(y / zoom) * width;
    const target = y * outWidth;
    for (let x = 0; x < outWidth; x++) out[target + x] = data[source + Math.floor(x / zoom)]!;
  }
  return out;
}

/** Paints a ring of the ellipse into the RGBA raster (row 0 = top). */
function drawEllipse(
  rgba: Uint8ClampedArray,
  width: number,
  height: number,
  centre: { column: number; row: number },
  semiMajor: number,
  semiMinor: number,
  paDeg: number,
): void {
  // Axis direction in image coordinates (y up); on the raster rows grow downwards.
  const d = majorAxisDirection(paDeg);
  const reach = semiMajor + RING_HALF_WIDTH + HALO_WIDTH + 1;
  const c0 = Math.max(0, Math.floor(centre.column - reach));
  const c1 = Math.min(width - 1, Math.ceil(centre.column + reach));
  const r0 = Math.max(0, Math.floor(centre.row - reach));
  const r1 = Math.min(height - 1, Math.ceil(centre.row + reach));
  for (let row = r0; row <= r1; row++) {
    const dy = centre.row - row;
    for (let column = c0; column <= c1; column++) {
      const dx = column - centre.column;
      const along = dx * d.x + dy * d.y;
      const across = -dx * d.y + dy * d.x;
      const radius = Math.hypot(along / semiMajor, across / semiMinor);
      // Distance to the ring in pixels, to first order: (radius − 1) times the local semi-axis.
      const local = radius > 0 ? Math.hypot(along, across) / radius : semiMinor;
      const distance = Math.abs(radius - 1) * local;
      if (distance > RING_HALF_WIDTH + HALO_WIDTH) continue;
      const i = 4 * (row * width + column);
      const isMarker =
        rgba[i] === MARKER_RGB[0] && rgba[i + 1] === MARKER_RGB[1] && rgba[i + 2] === MARKER_RGB[2];
      if (distance > RING_HALF_WIDTH) {
        // The halo, never over another marker's ring.
        if (!isMarker) for (let k = 0; k < 3; k++) rgba[i + k] = rgba[i + k]! * HALO_SHADE;
        continue;
      }
      rgba[i] = MARKER_RGB[0];
      rgba[i + 1] = MARKER_RGB[1];
      rgba[i + 2] = MARKER_RGB[2];
      rgba[i + 3] = 255;
    }
  }
}

export function renderQuicklook(
  plane: QuicklookPlane,
  sources: readonly QuicklookSource[],
  beam: QuicklookBeam,
  options: QuicklookOptions = {},
): QuicklookRaster {
  const { maxSize = 1024, clipPercent = 99.5, signed = false } = options;
  const colourMap = options.colourMap ?? (signed ? 'seesaw' : 'ember');
  if (!(Number.isInteger(maxSize) && maxSize >= 16)) {
    throw new RangeError(`The picture size must be a whole number of at least 16 pixels, got ${maxSize}.`);
  }
  colourMapTable(colourMap); // throws on an unknown map
  const scale = quicklookScale(plane.width, plane.height, maxSize);
  let width: number;
  let height: number;
  let data: Float32Array;
  if (scale < 1) {
    const view = downsampleMean(plane.data, plane.mask ?? null, plane.width, plane.height, maxSize);
    ({ width, height, data } = view);
  } else {
    const blanked = plane.mask ? plane.data.map((v, i) => (plane.mask![i] === 1 ? v : NaN)) : plane.data;
    width = plane.width * scale;
    height = plane.height * scale;
    data = magnify(blanked, plane.width, plane.height, scale);
  }
  const statistics = orderStatistics(data);
  if (statistics.count === 0) throw new RangeError('The plane has no valid pixels to show.');
  const clipped = clipLimits(statistics, clipPercent);
  const reach = Math.max(Math.abs(clipped.lower), Math.abs(clipped.upper));
  const limits = signed ? { lower: -reach, upper: reach } : clipped;
  const stretch = makeStretch(limits, { stretch: signed ? 'linear' : 'asinh' });
  const rgba = paintPlane(
    { width, height, data },
    stretch,
    colourMap,
    new Uint8ClampedArray(width * height * 4),
  );

  const semiMajor = Math.max((beam.majorPx / 2) * scale, MIN_MARKER_SEMI_AXIS);
  const semiMinor = Math.max((beam.minorPx / 2) * scale, MIN_MARKER_SEMI_AXIS);
  const markerCentres = sources.map((source) => {
    const column = (source.x - 0.5) * scale - 0.5;
    const rowFromBottom = (source.y - 0.5) * scale - 0.5;
    const centre = { column, row: height - 1 - rowFromBottom };
    drawEllipse(rgba, width, height, centre, semiMajor, semiMinor, beam.paDeg);
    return centre;
  });
  return { width, height, rgba, scale, limits, markerCentres };
}

/** The raster as a PNG file (8-bit RGBA). */
export async function encodeQuicklookPng(raster: QuicklookRaster): Promise<Buffer> {
  const image = Jimp.fromBitmap({
    width: raster.width,
    height: raster.height,
    data: Buffer.from(raster.rgba.buffer, raster.rgba.byteOffset, raster.rgba.byteLength),
  });
  return image.getBuffer('image/png');
}
