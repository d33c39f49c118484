/**
 * Numbers of a cross-match as shown on the page (value ± standard error with the unit), the default radius the
 * server will use (so it can be shown before matching), and the viewer markers of both catalogues.
 */
import type { CrossMatchResultDto } from '@shared/cross-match';
import type { ViewerSource } from '@/viewer/markers';

const unitSymbol = (unit: 'arcsec' | 'pixel') => (unit === 'arcsec' ? '″' : ' px');

/** "−0.75 ± 0.12″"; "—" without a value; the error left out when it is unknown (fewer than two pairs). */
export function formatWithError(
  value: number | null,
  error: number | null,
  unit: 'arcsec' | 'pixel' | '',
  digits = 2,
): string {
  if (value === null) return '—';
  const suffix = unit === '' ? '' : unitSymbol(unit);
  const text = (v: number) => v.toFixed(digits).replace('-', '−');
  return error === null ? `${text(value)}${suffix}` : `${text(value)} ± ${text(error)}${suffix}`;
}

/**
 * The radius the server uses when none is given: half the geometric-mean FWHM of the image's restoring beam on the
 * sky, or of the run's PSF in pixels (shared/cross-match.ts; server/catalogue/cross-match.ts).
 */
export function defaultRadius(
  mode: 'sky' | 'pixel',
  beam: { majorArcsec: number; minorArcsec: number } | null,
  psfFwhmPx: { major: number; minor: number } | null,
  pixelScaleArcsec: number | null,
): { value: number; from: 'beam' | 'psf' } | null {
  if (mode === 'sky') {
    if (beam && beam.majorArcsec > 0 && beam.minorArcsec > 0)
      return { value: 0.5 * Math.sqrt(beam.majorArcsec * beam.minorArcsec), from: 'beam' };
    if (psfFwhmPx && pixelScaleArcsec)
      return { value: 0.5 * Math.sqrt(psfFwhmPx.major * psfFwhmPx.minor) * pixelScaleArcsec, from: 'psf' };
    return null;
  }
  return psfFwhmPx ? { value: 0.5 * Math.sqrt(psfFwhmPx.major * psfFwhmPx.minor), from: 'psf' } : null;
}

/**
 * Markers for the viewer: ours (solid) for every source of ours, theirs (dashed, 'secondary') for every entry of
 * theirs that lands on the image; ids are prefixed so a click tells the two apart ("ours:3", "theirs:AWS-A").
 */
export function matchMarkers(
  result: CrossMatchResultDto,
  beam: { majorPixels: number; minorPixels: number; paDeg: number },
): ViewerSource[] {
  const unit = unitSymbol(result.unit);
  const ours: ViewerSource[] = [];
  const theirs: ViewerSource[] = [];
  const shape = { majorPixels: beam.majorPixels, minorPixels: beam.minorPixels, paDeg: beam.paDeg };
  for (const pair of result.pairs) {
    const partner = `${pair.separation.toFixed(2)}${unit}`;
    ours.push({
      ...shape,
      id: `ours:${pair.ourId}`,
      x: pair.ourX,
      y: pair.ourY,
      label: `Our source ${pair.ourId}`,
      details: [`paired with ${pair.theirId} at ${partner}`],
    });
    if (pair.theirX !== null && pair.theirY !== null) {
      theirs.push({
        ...shape,
        id: `theirs:${pair.theirId}`,
        x: pair.theirX,
        y: pair.theirY,
        kind: 'secondary',
        label: `${result.against.name}: ${pair.theirId}`,
        details: [`paired with our ${pair.ourId} at ${partner}`],
      });
    }
  }
  for (const entry of result.onlyOurs) {
    if (entry.x === null || entry.y === null) continue;
    ours.push({
      ...shape,
      id: `ours:${entry.id}`,
      x: entry.x,
      y: entry.y,
      label: `Our source ${entry.id}`,
      details: ['no partner'],
    });
  }
  for (const entry of result.onlyTheirs) {
    if (entry.x === null || entry.y === null) continue;
    theirs.push({
      ...shape,
      id: `theirs:${entry.id}`,
      x: entry.x,
      y: entry.y,
      kind: 'secondary',
      label: `${result.against.name}: ${entry.id}`,
      details: ['no partner'],
    });
  }
  return [...ours, ...theirs];
}
