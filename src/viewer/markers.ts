/**
 * Catalogue markers: each source is drawn as an ellipse of the beam (full widths at half maximum as the axes),
 * centred on its FITS pixel position. The position angle is measured from the image +y axis towards −x, which is
 * north through east for the sky's usual parity (north up, east left; FITS WCS paper II convention for PA).
 */
import type { Point } from './viewport';

export interface ViewerSource {
  id: number | string;
  /** FITS 1-based pixel position. */
  x: number;
  y: number;
  /** Beam (or fitted shape) FWHM along the major and minor axes, image pixels. */
  majorPixels: number;
  minorPixels: number;
  /** Degrees from image +y towards −x. */
  paDeg: number;
  /** Short name shown in the tooltip, e.g. "AWS J100028+021221". */
  label?: string;
  /** Further lines of the tooltip, e.g. flux density ± error, SNR. */
  details?: string[];
  /** 'secondary' markers (e.g. a reference catalogue beside ours) are drawn dashed in another colour. */
  kind?: 'primary' | 'secondary';
}

/** Unit vector of the major axis in image coordinates (y up). */
export function majorAxisDirection(paDeg: number): Point {
  const pa = (paDeg * Math.PI) / 180;
  return { x: -Math.sin(pa), y: Math.cos(pa) };
}

/** Rotation for CanvasRenderingContext2D.ellipse (screen y down, clockwise angles) of the major axis. */
export function screenRotation(paDeg: number): number {
  const d = majorAxisDirection(paDeg);
  return Math.atan2(-d.y, d.x);
}

/**
 * Whether `point` lies inside the source's half-maximum ellipse, with each semi-axis at least `minSemiAxis`
 * image pixels so that small markers stay easy to hit. Returns the normalised radius (≤ 1 inside).
 */
export function ellipseRadius(source: ViewerSource, point: Point, minSemiAxis = 0): number {
  const d = majorAxisDirection(source.paDeg);
  const dx = point.x - source.x;
  const dy = point.y - source.y;
  const along = dx * d.x + dy * d.y;
  const across = -dx * d.y + dy * d.x;
  const a = Math.max(source.majorPixels / 2, minSemiAxis);
  const b = Math.max(source.minorPixels / 2, minSemiAxis);
  return Math.hypot(along / a, across / b);
}

/** The source whose marker is under `point` (the one whose centre is relatively nearest), or null. */
export function sourceAt(
  sources: readonly ViewerSource[],
  point: Point,
  minSemiAxis = 0,
): ViewerSource | null {
  let best: ViewerSource | null = null;
  let bestRadius = 1;
  for (const source of sources) {
    const r = ellipseRadius(source, point, minSemiAxis);
    if (r <= bestRadius) {
      best = source;
      bestRadius = r;
    }
  }
  return best;
}
