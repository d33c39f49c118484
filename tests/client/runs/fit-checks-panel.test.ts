/**
 * The run page's fit checks: the residual spread against the unit normal (the figure's expected counts are
 * those of fit-checks.ts), the caution when the spread is off, the diffuse spectrum with its fitted law, and the
 * flux distribution fetched page by page only when its tab is opened.
 */
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import { mount, type VueWrapper } from '@vue/test-utils';
import { Quasar } from 'quasar';

import type { RunDiagnostics } from '@shared/runs';
import FitChecksPanel from '@/components/runs/FitChecksPanel.vue';
import { expectedNormalCounts } from '@/components/runs/fit-checks';
import { apiError, mockApi, type MockRequest } from '../support/api-mock';
import { settle } from '../support/mount';
import { makeSource } from './runs-support';

const plotly = vi.hoisted(() => ({ react: vi.fn(async () => undefined), purge: vi.fn() }));
vi.mock('plotly.js-dist-min', () => ({ default: plotly }));

type Trace = { x: number[]; y: number[]; error_y?: { array: number[] } };
type Call = [HTMLElement, Trace[], { xaxis: { title: { text: string } }; yaxis: { type?: string } }];
const lastDraw = () => plotly.react.mock.calls.at(-1) as unknown as Call;

let wrapper: VueWrapper | null = null;
beforeEach(() => plotly.react.mockClear());
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

const edges = Array.from({ length: 49 }, (_, i) => -6 + i * 0.25);
function diagnostics(std = 1.02): RunDiagnostics {
  const counts = expectedNormalCounts(edges, 4096).map((c) => Math.round(c * 1.1));
  return {
    residualHistogram: { edges, counts, mean: 0.01, std, count: counts.reduce((a, b) => a + b, 0) },
    spectrum: {
      k: [0, 0.01, 0.02, 0.04],
      power: [3, 2, 0.5, 0.1],
      mapPower: [3, 1.8, 0.4, 0.05],
      modes: [1, 8, 18, 40],
      fitted: [9, 2.1, 0.45, 0.11],
      amplitude: 12.5,
      slope: 3.4,
      turnover: 0.0039,
      estimated: true,
    },
    convergence: [],
    converged: true,
    iterations: 10,
    evaluations: 12,
    noise: { sigma: 1e-4, source: 'estimated' },
    psfFwhmPx: { major: 3, minor: 3 },
    beamAreaPx: 10.2,
    compactPrior: { alpha: 1.5, q: 0.05, pedestal: 0.03, fluxErrorScale: 1 },
  };
}

async function mountPanel(props: { diagnostics: RunDiagnostics; imageUnit?: string | null }) {
  wrapper = mount(FitChecksPanel, {
    attachTo: document.body,
    props: { runId: 42, ...props },
    global: { plugins: [Quasar] },
  });
  await settle();
  return wrapper;
}

async function openTab(name: 'residuals' | 'spectrum' | 'fluxes') {
  await wrapper!.get(`[data-test="tab-${name}"]`).trigger('click');
  await settle();
  await settle();
}

describe('FitChecksPanel', () => {
  it('draws the residual spread against the unit normal and states the tail share', async () => {
    mockApi({});
    const d = diagnostics();
    await mountPanel({ diagnostics: d });
    const text = wrapper!.get('[data-test="residual-spread"]').text();
    expect(text).toContain('mean 0.0100');
    expect(text).toContain('standard deviation 1.02');
    expect(text).toContain('a unit normal puts 0.27 % there');
    expect(wrapper!.find('[data-test="spread-caution"]').exists()).toBe(false);
    const [, traces, layout] = lastDraw();
    expect(traces[0]!.y).toEqual(d.residualHistogram.counts);
    expect(traces[0]!.x[0]).toBeCloseTo(-5.875, 12);
    expect(traces[1]!.y).toEqual(expectedNormalCounts(edges, d.residualHistogram.count));
    // The Poisson band around it: expected ± √expected.
    const expectedCounts = expectedNormalCounts(edges, d.residualHistogram.count);
    expect(traces[3]!.y[24]).toBeCloseTo(expectedCounts[24]! + Math.sqrt(expectedCounts[24]!), 9);
    expect(traces[2]!.y[24]).toBeCloseTo(expectedCounts[24]! - Math.sqrt(expectedCounts[24]!), 9);
    expect(layout.yaxis.type).toBe('log');
    // From half a pixel up to twice the fullest bin, so the unit normal's far tail does not squeeze the bars.
    const top = Math.max(
      ...d.residualHistogram.counts,
      ...expectedNormalCounts(edges, d.residualHistogram.count),
    );
    expect((layout.yaxis as unknown as { range: number[] }).range).toEqual([
      Math.log10(0.5),
      Math.log10(2 * top),
    ]);
    await wrapper!.get('[data-test="log-counts"]').trigger('click');
    await settle();
    expect(lastDraw()[2].yaxis.type).toBe('linear');
  });

  it('warns when the spread is far from 1', async () => {
    mockApi({});
    await mountPanel({ diagnostics: diagnostics(1.6) });
    expect(wrapper!.get('[data-test="spread-caution"]').text()).toContain('more than 20 % away from 1');
  });

  it('shows the binned spectrum with error bars against the fitted law and its parameters', async () => {
    mockApi({});
    await mountPanel({ diagnostics: diagnostics() });
    await openTab('spectrum');
    expect(wrapper!.get('[data-test="spectrum-law"]').text()).toMatch(
      /a = 12\.5,\s*γ = 3\.40,\s*k₀ = 0\.00390 cycles per pixel\s*\(estimated from the data\)/,
    );
    const [, traces] = lastDraw();
    // The k = 0 bin cannot sit on a log axis.
    expect(traces[0]!.x).toEqual([0.01, 0.02, 0.04]);
    expect(traces[0]!.error_y!.array[0]).toBeCloseTo(2 * Math.sqrt(2 / 8), 12);
    expect(traces[1]!.y).toEqual([2.1, 0.45, 0.11]);
  });

  it('fetches the catalogue page by page only when the flux tab opens, and histograms log₁₀ flux density', async () => {
    // 1500 invented sources with flux densities between 1 and 100 mJy.
    const all = Array.from({ length: 1500 }, (_, k) =>
      makeSource({ id: k + 1, flux: 1, fluxDensity: 10 ** (-3 + (2 * k) / 1499) }),
    );
    const api = mockApi({
      'GET /api/runs/:id/sources': (request: MockRequest) => {
        const page = Number(request.query.get('page'));
        const size = Number(request.query.get('pageSize'));
        return {
          body: {
            sources: all.slice((page - 1) * size, page * size),
            page,
            pageSize: size,
            total: 1500,
            caution: '',
          },
        };
      },
    });
    await mountPanel({ diagnostics: diagnostics(), imageUnit: 'Jy/beam' });
    expect(api.callsTo('GET /api/runs/:id/sources')).toHaveLength(0);
    await openTab('fluxes');
    const calls = api.callsTo('GET /api/runs/:id/sources');
    expect(calls.map((c) => c.query.get('page'))).toEqual(['1', '2']);
    expect(calls[0]!.query.get('pageSize')).toBe('1000');
    const [, traces, layout] = lastDraw();
    expect(layout.xaxis.title.text).toBe('log₁₀ flux density (Jy)');
    // log₁₀ from −3 to −1 in 0.1 dex bins: 20 bins, plus the one that holds exactly −1.
    expect(traces[0]!.y.reduce((a, b) => a + b, 0)).toBe(1500);
    expect(traces[0]!.x).toHaveLength(21);
    expect(wrapper!.get('[data-test="flux-distribution"]').text()).toContain('1,500 sources');
    await openTab('residuals');
    await openTab('fluxes');
    expect(api.callsTo('GET /api/runs/:id/sources')).toHaveLength(2);
  });

  it('shows the server message when the catalogue cannot be read', async () => {
    mockApi({ 'GET /api/runs/:id/sources': apiError(409, 'conflict', 'Run 42 is running.') });
    await mountPanel({ diagnostics: diagnostics() });
    await openTab('fluxes');
    expect(wrapper!.get('[data-test="flux-distribution"]').text()).toContain('Run 42 is running.');
  });
});
