/**
 * Words and numbers of the comparison page, kept out of the templates so they can be tested: run labels, the
 * cross-match summary lines (counts, radius and where it came from, mean offsets and flux ratio with their
 * standard errors) and the cautions that go with them.
 */
import type { RunCrossMatch } from '@shared/comparisons';

/**
 * The runs' column and panel titles: "Run 12", with the preset added when the runs started from different
 * presets (the table below then shows it anyway, but the panels need it too).
 */
export function runLabels(runs: readonly { id: number; settings?: Record<string, unknown> }[]): string[] {
  const presets = new Set(runs.map((run) => run.settings?.preset));
  return runs.map((run) => {
    const preset = run.settings?.preset;
    return presets.size > 1 && typeof preset === 'string' ? `Run ${run.id} (${preset})` : `Run ${run.id}`;
  });
}

/** value ± error with the error to 2 significant digits and the value to the same decimal place. */
export function withError(value: number | null, error: number | null, unit = ''): string {
  if (value === null || !Number.isFinite(value)) return '—';
  const suffix = unit ? ` ${unit}` : '';
  if (error === null || !Number.isFinite(error) || error <= 0) return `${value.toPrecision(4)}${suffix}`;
  const decimals = Math.max(0, 1 - Math.floor(Math.log10(error)));
  // Tiny errors (e.g. the same fit twice): significant digits instead of a long row of zeros.
  if (decimals > 6) return `${value.toPrecision(3)} ± ${error.toPrecision(2)}${suffix}`;
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

/** Largest |value| and root mean square of the finite values of a difference plane. */
export function differenceStatistics(data: Float32Array): { largest: number; rms: number; count: number } {
  let largest = 0;
  let sumSquares = 0;
  let count = 0;
  for (const value of data) {
    if (!Number.isFinite(value)) continue;
    largest = Math.max(largest, Math.abs(value));
    sumSquares += value * value;
    count++;
  }
  return { largest, rms: count > 0 ? Math.sqrt(sumSquares / count) : 0, count };
}

/**
 * One line under the difference: its size, or that the two diffuse fields are the same. With the image's noise σ
 * it adds that σ for scale, since two MAP estimates give no error map of their difference.
 */
export function differenceText(
  data: Float32Array,
  unit: string | null,
  noiseSigma: number | null = null,
): string {
  const { largest, rms, count } = differenceStatistics(data);
  if (count === 0) return 'The difference has no valid pixels.';
  if (largest === 0) {
    return (
      'The two diffuse fields are identical: the settings that differ act only on the catalogue ' +
      '(e.g. the detection threshold), not on the fit.'
    );
  }
  const u = unit ? ` ${unit}` : '';
  const size = `Largest |difference| ${largest.toPrecision(3)}${u}, RMS ${rms.toPrecision(3)}${u} (over the shown, block-averaged pixels).`;
  if (noiseSigma === null || !(noiseSigma > 0)) return `${size} No error map of the difference is computed.`;
  return (
    `${size} For scale: the image noise σ is ${noiseSigma.toPrecision(3)}${u} per pixel; no error map of the ` +
    'difference is computed (both fields are MAP estimates).'
  );
}
