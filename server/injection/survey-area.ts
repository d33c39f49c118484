/**
 * The area a run's catalogue covers, for source densities: valid pixels × the solid angle of one pixel in deg²
 * when the image has a celestial WCS, else valid pixels (pixel² units, said so in every answer).
 * The pixel solid angle is |Δlon · Δlat| of the WCS linear transform at the reference point; for the small
 * fields Skysieve handles the projection changes it by far less than the Poisson errors (e.g. SIN/TAN at 1° from
 * the reference point: 1 − cos 1° ≈ 1.5e-4; FITS WCS paper II projections, from memory).
 */
import type { AreaUnit } from '../../shared/injection';
import type { HeaderCard } from '../engine/io/header-card';
import { parseWcs } from '../engine/wcs/wcs';

export interface SurveyArea {
  area: number;
  unit: AreaUnit;
  validPixels: number;
  /** One pixel in the area's unit. */
  pixelArea: number;
}

export function surveyArea(
  width: number,
  height: number,
  mask: Uint8Array,
  header: HeaderCard[],
): SurveyArea {
  let validPixels = width * height;
  if (mask.length === width * height) {
    validPixels = 0;
    for (const m of mask) if (m !== 0) validPixels++;
  }
  const wcs = parseWcs(header);
  if (wcs?.isCelestial) {
    const [sx, sy] = wcs.pixelScaleDeg();
    if (sx > 0 && sy > 0)
      return { area: validPixels * sx * sy, unit: 'deg2', validPixels, pixelArea: sx * sy };
  }
  return { area: validPixels, unit: 'pixel2', validPixels, pixelArea: 1 };
}
