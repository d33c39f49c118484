/**
 * The flux–flux figure of a cross-match as plain Plotly traces and layout (drawn by PlotlyFigure.vue): each
 * matched source at (second run's flux, first run's flux) with the 1σ errors of both runs as error bars, and the
 * 1:1 line across every point with its bars. Logarithmic axes when every flux is positive (the usual case:
 * fluxes span decades), linear otherwise.
 */
import type { RunCrossMatch } from '@shared/comparisons';

export interface FluxScatterFigure {
  data: Record<string, unknown>[];
  layout: Record<string, unknown>;
  /** What the figure shows, for screen readers. */
  label: string;
}

export function fluxScatterFigure(match: RunCrossMatch, labelA: string, labelB: string): FluxScatterFigure {
  const pairs = match.pairs;
  const quantity = match.fluxKind === 'fluxDensity' ? 'flux density' : 'flux';
  const unit = match.fluxUnit ? ` (${match.fluxUnit})` : '';
  const positive = pairs.every((pair) => pair.a.flux > 0 && pair.b.flux > 0);
  const ends = pairs.flatMap((pair) => [
    pair.a.flux - pair.a.fluxErr,
    pair.a.flux + pair.a.fluxErr,
    pair.b.flux - pair.b.fluxErr,
    pair.b.flux + pair.b.fluxErr,
  ]);
  // On log axes a bar reaching below zero cannot be drawn; the line spans the positive part.
  const usable = positive ? ends.filter((v) => v > 0) : ends;
  const low = usable.length ? Math.min(...usable) : 0;
  const high = usable.length ? Math.max(...usable) : 1;
  const axisType = positive ? 'log' : 'linear';
  return {
    data: [
      {
        x: [low, high],
        y: [low, high],
        mode: 'lines',
        name: '1:1',
        hoverinfo: 'skip',
        line: { color: '#888', dash: 'dash', width: 1 },
      },
      {
        x: pairs.map((pair) => pair.b.flux),
        y: pairs.map((pair) => pair.a.flux),
        error_x: { type: 'data', array: pairs.map((pair) => pair.b.fluxErr), visible: true, thickness: 1 },
        error_y: { type: 'data', array: pairs.map((pair) => pair.a.fluxErr), visible: true, thickness: 1 },
        text: pairs.map(
          (pair) =>
            `source ${pair.a.id} / ${pair.b.id}, ratio ${pair.fluxRatio === null ? '—' : pair.fluxRatio.toFixed(3)}`,
        ),
        hovertemplate: `${labelB} %{x:.4g}<br>${labelA} %{y:.4g}<br>%{text}<extra></extra>`,
        mode: 'markers',
        name: 'matched sources',
        marker: { size: 6, color: '#2f7fb0' },
      },
    ],
    layout: {
      xaxis: { type: axisType, title: { text: `${labelB}: ${quantity}${unit}` } },
      yaxis: { type: axisType, title: { text: `${labelA}: ${quantity}${unit}` } },
    },
    label:
      `${quantity} in ${labelA} against ${labelB} for ${pairs.length} matched sources, ` +
      'with error bars and the 1:1 line',
  };
}
