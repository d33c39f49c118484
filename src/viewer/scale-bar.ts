/**
 * Scale bar: the longest "nice" angle (1, 2, 5 steps and the 15/30 steps of sexagesimal units — common
 * practice, no source) whose bar fits in `maxScreenPixels`, with its label in arcsec (″), arcmin (′) or
 * degrees (°).
 */

const NICE_ARCSEC = [
  0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1, 2, 5, 10, 15, 20, 30, 60, 120, 300, 600, 900, 1200, 1800, 3600, 7200,
  18000, 36000,
];

export interface ScaleBar {
  arcsec: number;
  screenPixels: number;
  label: string;
}

function trim(n: number): string {
  return String(Number(n.toPrecision(6)));
}

export function formatAngle(arcsec: number): string {
  if (arcsec >= 3600) return `${trim(arcsec / 3600)}°`;
  if (arcsec >= 60) return `${trim(arcsec / 60)}′`;
  return `${trim(arcsec)}″`;
}

/**
 * @param arcsecPerScreenPixel angle of one screen pixel (image pixel scale / zoom)
 * @returns null when even the smallest nice angle is too long, or the scale is not a positive number
 */
export function chooseScaleBar(arcsecPerScreenPixel: number, maxScreenPixels = 120): ScaleBar | null {
  if (!(arcsecPerScreenPixel > 0) || !Number.isFinite(arcsecPerScreenPixel)) return null;
  let best: number | null = null;
  for (const arcsec of NICE_ARCSEC) {
    if (arcsec / arcsecPerScreenPixel <= maxScreenPixels) best = arcsec;
  }
  if (best === null) return null;
  return { arcsec: best, screenPixels: best / arcsecPerScreenPixel, label: formatAngle(best) };
}
