/**
 * Words and numbers of the comparison page, kept out of the templates so they can be tested: run labels, the
 * cross-match summary lines (counts, radius and where it came from, mean offsets and flux ratio with their
 * standard errors) and the cautions that go with them.
 */
import type { RunCrossMatch } from '@shared/comparisons';

/** A run's column and panel title. */
export function runLabel(run: { id: number; settings?: Record<string, unknown> }): string {
  const preset = run.settings?.preset;
  return typeof preset === 'string' ? `Run ${run.id} (${preset})` : `Run ${run.id}`;
}

/** value ± error with the error to 2 significant digits and the value to the same decimal place. */
export function withError(value: number | null, error: number | null, unit = ''): string {
  if (value === null || !Number.isFinite(value)) return '—';
  const suffix = unit ? ` ${unit}` : '';
  if (error === null || !Number.isFinite(error) || error <= 0) return `${value.toPrecision(4)}${suffix}`;
  const decimals = Math.max(0, 1 - Math.floor(Math.log10(error)));
  if (decimals > 10) return `${value.toPrecision(4)} ± ${error.toPrecision(2)}${suffix}`;
  return `${value.toFixed(decimals)} ± ${error.toFixed(decimals)}${suffix}`;
}

const RADIUS_SOURCES: Record<RunCrossMatch['radiusSource'], string> = {
  given: 'as given',
  beam: 'half the beam FWHM',
  psf: 'half the PSF FWHM',
};

export interface SummaryLine {
  label: string;
  value: string;
}

export function crossMatchSummary(match: RunCrossMatch, labelA: string, labelB: string): SummaryLine[] {
  const unit = match.unit === 'arcsec' ? '″' : 'px';
  const offsetNames = match.mode === 'sky' ? ['ΔRA·cos Dec', 'ΔDec'] : ['Δx', 'Δy'];
  const lines: SummaryLine[] = [
    { label: 'Matched', value: String(match.counts.matched) },
    { label: `Only in ${labelA}`, value: `${match.counts.onlyA} of ${match.counts.a}` },
    { label: `Only in ${labelB}`, value: `${match.counts.onlyB} of ${match.counts.b}` },
    {
      label: 'Match radius',
      value: `${Number(match.radius.toPrecision(3))}${unit === '″' ? '″' : ' px'} (${RADIUS_SOURCES[match.radiusSource]}, ${match.mode === 'sky' ? 'on the sky' : 'in pixels'})`,
    },
    {
      label: `Mean offset ${offsetNames[0]} (${labelA} − ${labelB})`,
      value: withError(match.offsets.mean1, match.offsets.mean1Err, unit),
    },
    {
      label: `Mean offset ${offsetNames[1]}`,
      value: withError(match.offsets.mean2, match.offsets.mean2Err, unit),
    },
    {
      label: `Flux ratio ${labelA} / ${labelB} (median)`,
      value: withError(match.fluxRatio.median, match.fluxRatio.medianErr),
    },
    {
      label: 'Flux ratio scatter (1.4826 × MAD)',
      value: match.fluxRatio.robustScatter === null ? '—' : match.fluxRatio.robustScatter.toPrecision(3),
    },
  ];
  return lines;
}

/** Extra cautions for this particular match, on top of the general one the server sends. */
export function crossMatchCautions(match: RunCrossMatch): string[] {
  const out: string[] = [];
  if (match.counts.matched < 5)
    out.push(
      `Only ${match.counts.matched} matched source(s): the offsets and the flux ratio are poorly determined.`,
    );
  if (match.fluxKind === 'flux')
    out.push(
      'Fluxes are integrated image units × pixels: the image has no per-beam unit to give flux densities.',
    );
  return out;
}
