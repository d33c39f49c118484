/**
 * The readout under the cursor: FITS pixel position, value with its unit, and the sky position in degrees and
 * sexagesimal. The sky position comes from a caller's `pixelToWorld` (FITS 1-based pixels → degrees), so the
 * viewer needs no projection code of its own; sexagesimal text comes from the engine's formatter.
 */
import type { HeaderCardDto } from '@shared/images';
import { formatDec, formatRa } from '../../server/engine/wcs/sexagesimal';
import { parseWcs } from '../../server/engine/wcs/wcs';

/** FITS pixel (1-based) → world longitude/latitude in degrees, or null where the projection has no solution. */
export type PixelToWorld = (x: number, y: number) => { lon: number; lat: number } | null;

export interface Readout {
  /** e.g. "x 1024, y 512" */
  pixel: string;
  /** e.g. "3.142e-3 Jy/beam", "blank" outside valid data. */
  value: string;
  /** e.g. "RA 150.11917°, Dec +2.20583°" or null without a celestial WCS. */
  degrees: string | null;
  /** e.g. "10:00:28.600 +02:12:21.00" */
  sexagesimal: string | null;
}

/**
 * The celestial pixel → world mapping of an image's header cards (the engine's WCS reader: TAN, SIN, ARC, STG,
 * CAR, SIP), or null for a header without a celestial WCS. Pure TypeScript, shared with the server as is.
 */
export function pixelToWorldFromHeader(header: readonly HeaderCardDto[]): PixelToWorld | null {
  const wcs = parseWcs(header);
  if (!wcs || !wcs.isCelestial) return null;
  return (x, y) => {
    const [lon, lat] = wcs.pixelToWorld(x, y);
    return Number.isFinite(lon) && Number.isFinite(lat) ? { lon, lat } : null;
  };
}

/** A pixel value in four significant digits; scientific outside [1e-3, 1e5). */
export function formatPixelValue(value: number, unit?: string | null): string {
  if (!Number.isFinite(value)) return 'blank';
  const magnitude = Math.abs(value);
  const text =
    magnitude !== 0 && (magnitude < 1e-3 || magnitude >= 1e5) ? value.toExponential(3) : value.toPrecision(4);
  return unit ? `${text} ${unit}` : text;
}

export function formatReadout(
  pixel: { x: number; y: number },
  value: number,
  unit: string | null | undefined,
  pixelToWorld?: PixelToWorld | null,
): Readout {
  const world = pixelToWorld ? pixelToWorld(pixel.x, pixel.y) : null;
  const valid = world !== null && Number.isFinite(world.lon) && Number.isFinite(world.lat);
  const lon = valid ? ((world.lon % 360) + 360) % 360 : NaN;
  return {
    pixel: `x ${pixel.x}, y ${pixel.y}`,
    value: formatPixelValue(value, unit),
    degrees: valid ? `RA ${lon.toFixed(5)}°, Dec ${world.lat >= 0 ? '+' : ''}${world.lat.toFixed(5)}°` : null,
    sexagesimal: valid ? `${formatRa(lon)} ${formatDec(world.lat)}` : null,
  };
}
