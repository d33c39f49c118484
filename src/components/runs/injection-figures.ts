/**
 * Pure helpers of the completeness page: reading the levels a person types, and the Plotly traces and layouts of
 * the completeness, flux-bias and number-counts plots (error bars as Plotly's asymmetric `error_y`), so the
 * figures can be tested without drawing them.
 */
import type { AreaUnit, LevelResultBody, NumberCountsBin } from '@shared/injection';
import { MAX_INJECTION_LEVELS } from '@shared/injection';

/** Levels typed as "3, 5, 8 15": positive, distinct numbers; sorted. */
export function parseLevels(text: string): { levels: number[] } | { error: string } {
  const parts = text
    .split(/[\s,;]+/)
    .map((part) => part.trim())
    .filter((part) => part !== '');
  if (parts.length === 0) return { error: 'Give at least one level.' };
  const levels: number[] = [];
  for (const part of parts) {
    const value = Number(part);
    if (!Number.isFinite(value) || value <= 0) return { error: `“${part}” is not a positive number.` };
    levels.push(value);
  }
  if (levels.length > MAX_INJECTION_LEVELS) return { error: `Give at most ${MAX_INJECTION_LEVELS} levels.` };
  if (new Set(levels).size !== levels.length) return { error: 'Levels must all differ.' };
  return { levels: levels.sort((a, b) => a - b) };
}

export interface Figure {
  data: Record<string, unknown>[];
  layout: Record<string, unknown>;
}

const fluxTitle = (unit: string) => (unit ? `injected flux (${unit})` : 'injected flux');

/** The x value of a level: its flux, or its SNR when asked and known. */
const xOf = (level: LevelResultBody, axis: 'flux' | 'snr') =>
  axis === 'snr' && level.snr !== null ? level.snr : level.flux;

/** Completeness against flux (log axis) with the Wilson interval as asymmetric error bars. */
export function completenessFigure(
  levels: readonly LevelResultBody[],
  fluxUnit: string,
  axis: 'flux' | 'snr' = 'flux',
): Figure {
  const sorted = [...levels].sort((a, b) => a.flux - b.flux);
  return {
    data: [
      {
        x: sorted.map((level) => xOf(level, axis)),
        y: sorted.map((level) => level.completeness),
        error_y: {
          type: 'data',
          symmetric: false,
          array: sorted.map((level) => level.completenessHigh - level.completeness),
          arrayminus: sorted.map((level) => level.completeness - level.completenessLow),
        },
        text: sorted.map((level) => `${level.recovered} of ${level.injected}`),
        hovertemplate: '%{x:.4g}<br>completeness %{y:.2f} (%{text})<extra></extra>',
        mode: 'lines+markers',
        name: 'completeness',
        line: { color: '#2f7fb0' },
      },
    ],
    layout: {
      xaxis: { type: 'log', title: { text: axis === 'snr' ? 'injected SNR' : fluxTitle(fluxUnit) } },
      yaxis: { range: [0, 1.05], title: { text: 'completeness (68 % Wilson interval)' } },
    },
  };
}

/** Flux bias (median measured/injected − 1) with its standard error, and the scatter as a band. */
export function fluxBiasFigure(
  levels: readonly LevelResultBody[],
  fluxUnit: string,
  axis: 'flux' | 'snr' = 'flux',
): Figure {
  const measured = [...levels].filter((level) => level.fluxBias !== null).sort((a, b) => a.flux - b.flux);
  const x = measured.map((level) => xOf(level, axis));
  return {
    data: [
      {
        x,
        y: measured.map((level) => level.fluxBias),
        error_y: { type: 'data', array: measured.map((level) => level.fluxBiasErr ?? 0) },
        mode: 'lines+markers',
        name: 'bias',
        line: { color: '#c0632b' },
        hovertemplate: '%{x:.4g}<br>bias %{y:.3f}<extra></extra>',
      },
      {
        x: [...x, ...[...x].reverse()],
        y: [
          ...measured.map((level) => (level.fluxBias ?? 0) + (level.fluxScatter ?? 0)),
          ...[...measured].reverse().map((level) => (level.fluxBias ?? 0) - (level.fluxScatter ?? 0)),
        ],
        fill: 'toself',
        mode: 'none',
        name: 'scatter (1.4826 MAD)',
        fillcolor: 'rgba(192, 99, 43, 0.18)',
        hoverinfo: 'skip',
      },
    ],
    layout: {
      xaxis: { type: 'log', title: { text: axis === 'snr' ? 'injected SNR' : fluxTitle(fluxUnit) } },
      yaxis: { title: { text: 'measured / injected − 1' }, zeroline: true },
    },
  };
}

export const areaWords = (unit: AreaUnit) => (unit === 'deg2' ? 'deg⁻²' : 'pixel⁻²');

/** Sources per bin per unit area against flux, raw and completeness-corrected, with Gehrels error bars. */
export function numberCountsFigure(
  bins: readonly NumberCountsBin[],
  fluxUnit: string,
  areaUnit: AreaUnit,
): Figure {
  const shown = bins.filter((bin) => bin.count > 0);
  const corrected = bins.filter((bin) => bin.corrected !== null && bin.count > 0);
  const trace = (
    rows: readonly NumberCountsBin[],
    pick: (bin: NumberCountsBin) => { value: number; low: number; high: number },
  ) => ({
    x: rows.map((bin) => bin.fluxCentre),
    y: rows.map((bin) => pick(bin).value),
    error_y: {
      type: 'data',
      symmetric: false,
      array: rows.map((bin) => pick(bin).high - pick(bin).value),
      arrayminus: rows.map((bin) => pick(bin).value - pick(bin).low),
    },
  });
  const data: Record<string, unknown>[] = [
    { ...trace(shown, (bin) => bin.perArea), mode: 'markers', name: 'raw', marker: { color: '#2f7fb0' } },
  ];
  if (corrected.length > 0) {
    data.push({
      ...trace(corrected, (bin) => bin.corrected!.perArea),
      mode: 'markers',
      name: 'completeness-corrected',
      marker: { color: '#c0632b', symbol: 'diamond' },
    });
  }
  return {
    data,
    layout: {
      xaxis: { type: 'log', title: { text: fluxUnit ? `flux (${fluxUnit})` : 'flux' } },
      yaxis: { type: 'log', title: { text: `sources per bin, ${areaWords(areaUnit)}` } },
      showlegend: true,
      legend: { orientation: 'h', y: -0.25 },
    },
  };
}

const id = (value: number) => encodeURIComponent(String(value));

export function studyExportUrl(
  runId: number,
  studyId: number,
  table: 'completeness' | 'false-sources',
  format: 'csv' | 'votable' | 'fits',
): string {
  return `/api/runs/${id(runId)}/injection-studies/${id(studyId)}/export?table=${table}&format=${format}`;
}

export function countsExportUrl(runId: number, bins: string, format: 'csv' | 'votable' | 'fits'): string {
  const query = new URLSearchParams({ format });
  if (bins.trim() !== '') query.set('bins', bins.trim());
  return `/api/runs/${id(runId)}/number-counts?${query.toString()}`;
}

/**
 * Flux of an isolated point source at `snr` for the form's hint: SNR · σ / √Σpsf², with Σpsf² of a well-sampled
 * Gaussian PSF = 1/(4π s_major s_minor), s = FWHM / (2√(2 ln 2)) (the Gaussian integral; the server uses the
 * pixel-integrated PSF, a little different for PSFs of a few pixels).
 */
export function isolatedSourceFlux(
  snr: number,
  sigma: number,
  fwhmMajorPx: number,
  fwhmMinorPx: number,
): number {
  const perFwhm = 1 / (2 * Math.sqrt(2 * Math.LN2));
  return snr * sigma * Math.sqrt(4 * Math.PI * fwhmMajorPx * perFwhm * fwhmMinorPx * perFwhm);
}
