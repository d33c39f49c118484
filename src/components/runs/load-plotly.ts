/** Plotly, imported once on first use (one ~4.6 MB chunk), shared by every figure on the page. */
type Plotly = (typeof import('plotly.js-dist-min'))['default'];

let loading: Promise<Plotly> | null = null;

export function loadPlotly(): Promise<Plotly> {
  loading ??= import('plotly.js-dist-min').then((module) => module.default);
  loading.catch(() => (loading = null));
  return loading;
}
