/** The little of Plotly's API the run pages use (plotly.js-dist-min ships no types). */
declare module 'plotly.js-dist-min' {
  interface PlotlyApi {
    react(element: HTMLElement, data: unknown[], layout?: unknown, config?: unknown): Promise<unknown>;
    purge(element: HTMLElement): void;
  }
  const Plotly: PlotlyApi;
  export default Plotly;
}
