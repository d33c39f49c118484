import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';

import RunPage from '@/pages/RunPage.vue';
import SkyViewer from '@/components/viewer/SkyViewer.vue';
import SourceTable from '@/components/runs/SourceTable.vue';
import { apiError, type MockRequest } from '../support/api-mock';
import { makeUser } from '../support/fixtures';
import { mountPage, pageText, settle, unmountAll } from '../support/mount';
import {
  FakeEventSource,
  makeFinishedRun,
  makeImageDetail,
  makeRun,
  makeSource,
  mockRunsApi,
} from './runs-support';

const plotly = vi.hoisted(() => ({ react: vi.fn(async () => undefined), purge: vi.fn() }));
vi.mock('plotly.js-dist-min', () => ({ default: plotly }));

beforeEach(() => {
  FakeEventSource.instances = [];
  plotly.react.mockClear();
  vi.stubGlobal('EventSource', FakeEventSource);
});
afterEach(unmountAll);

const owner = makeUser({ id: 1 });
const image = makeImageDetail();
const sources = [
  makeSource({ id: 1, x: 20.5, y: 30.25, snr: 12, flux: 0.012 }),
  makeSource({ id: 2, x: 50, y: 10, snr: 6.2, flux: 0.004, flags: ['edge'] }),
];
const sourcePage = (request: MockRequest) => ({
  body: {
    sources,
    page: Number(request.query.get('page') ?? 1),
    pageSize: Number(request.query.get('pageSize') ?? 25),
    total: 2,
    caution: 'Model-dependent catalogue.',
  },
});

function progressEvent(iteration: number, objective: number, fraction: number, stage = 'diffuse') {
  return {
    id: 42,
    status: 'running',
    progress: { phase: 'fit', stage, iteration, objective, gradNorm: 1, fraction },
    errorMessage: null,
  };
}

describe('RunPage', () => {
  it('follows a running run over SSE (chart, progress, cancel), then shows its results', async () => {
    let finished = false;
    const running = makeRun({
      timings: { ...makeRun().timings, startedAt: new Date(Date.now() - 5000).toISOString() },
    });
    const api = mockRunsApi({
      'GET /api/runs/:id': () => ({ body: finished ? makeFinishedRun() : running }),
      'GET /api/images/:id': { body: image },
      'POST /api/runs/:id/cancel': { status: 202 },
      'GET /api/runs/:id/sources': sourcePage,
    });
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user: owner });
    expect(wrapper.get('[data-test="run-status"]').text()).toBe('Fitting');
    expect(FakeEventSource.instances).toHaveLength(1);
    const stream = FakeEventSource.instances[0]!;
    expect(stream.url).toBe('/api/runs/42/events');
    expect(stream.withCredentials).toBe(true);

    stream.emit('run', progressEvent(1, 900, 0.1));
    stream.emit('run', progressEvent(2, 700, 0.2));
    // A new stage starts its own count: the chart's axis continues across stages.
    stream.emit('run', progressEvent(1, 650, 0.4, 'joint-1'));
    await settle();
    const progress = wrapper.get('[data-test="run-progress"]').text();
    expect(progress).toContain('joint-1');
    expect(progress).toContain('40 % done');
    expect(progress).toMatch(/Elapsed: \d+ s/);
    const lastCall = plotly.react.mock.calls.at(-1) as unknown as [
      HTMLElement,
      { x: number[]; y: number[] }[],
    ];
    expect(lastCall[1][0]!.x).toEqual([1, 2, 3]);
    expect(lastCall[1][0]!.y).toEqual([900, 700, 650]);

    await wrapper.get('[data-test="cancel-run"]').trigger('click');
    await settle();
    expect(api.callsTo('POST /api/runs/:id/cancel')).toHaveLength(1);
    expect(wrapper.get('[data-test="cancel-run"]').text()).toBe('Stopping…');

    finished = true;
    stream.emit('end', { id: 42, status: 'succeeded', progress: null, errorMessage: null });
    await settle();
    await settle();
    expect(stream.closed).toBe(true);
    expect(wrapper.get('[data-test="run-status"]').text()).toBe('Finished');
    expect(wrapper.find('[data-test="cancel-run"]').exists()).toBe(false);
    const text = pageText();
    expect(text).toContain('A catalogue is model-dependent');
    expect(text).toContain('completeness and false-detection rate must be measured');
    expect(wrapper.get('[data-test="provenance"]').text()).toContain('a'.repeat(64));
    expect(wrapper.get('[data-test="provenance"]').text()).toContain('Skysieve 0.1.0');
    expect(wrapper.findAll('[data-test="catalogue-table"] tbody tr')).toHaveLength(2);
    expect(api.callsTo('GET /api/runs/:id/sources')[0]!.query.get('sort')).toBe('-snr');
    // The data plane first (the image's own pixels), then each component on demand.
    expect(api.planeCalls.map((call) => call.path)).toEqual(['/api/images/11/pixels']);
    const residual = wrapper
      .findAll('[data-test="plane-switcher"] button')
      .find((node) => node.text() === 'Normalised residual');
    await residual!.trigger('click');
    await settle();
    expect(api.planeCalls.at(-1)!.path).toBe('/api/runs/42/components/residualNorm');
    const viewer = wrapper.getComponent(SkyViewer);
    expect(viewer.props('plane')?.data[1]).toBeCloseTo(0.02, 6);
    const hrefs = wrapper.findAll('[data-test="exports"] a').map((node) => node.attributes('href'));
    expect(hrefs).toContain('/api/runs/42/sources?format=csv&sort=-snr');
    expect(hrefs).toContain('/api/runs/42/sources?format=votable&sort=-snr');
    expect(hrefs).toContain('/api/runs/42/sources?format=fits&sort=-snr');
    expect(hrefs).toContain('/api/runs/42/components/residualNorm?format=fits');
    api.expectNoUnexpectedCalls();
  });

  it('offers no cancel button to a viewer of the project', async () => {
    mockRunsApi(
      {
        'GET /api/runs/:id': { body: makeRun({ status: 'queued' }) },
        'GET /api/images/:id': { body: image },
      },
      'viewer',
    );
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user: owner });
    expect(wrapper.get('[data-test="run-status"]').text()).toBe('Waiting for a worker');
    expect(wrapper.find('[data-test="cancel-run"]').exists()).toBe(false);
  });

  it('selecting a row centres the viewer on it and highlights its marker; a marker click selects the row', async () => {
    mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun() },
      'GET /api/images/:id': { body: image },
      'GET /api/runs/:id/sources': sourcePage,
    });
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user: owner });
    await settle();
    expect(FakeEventSource.instances).toHaveLength(0);
    const rows = wrapper.findAll('[data-test="catalogue-table"] tbody tr');
    await rows[1]!.trigger('click');
    await settle();
    const table = wrapper.getComponent(SourceTable);
    expect(table.emitted('select')?.[0]?.[0]).toMatchObject({ id: 2, x: 50, y: 10 });
    const viewer = wrapper.getComponent(SkyViewer);
    expect(viewer.props('selectedId')).toBe(2);
    expect(viewer.props('view')).toMatchObject({ centreX: 50, centreY: 10 });
    expect(viewer.props('sources')?.map((s) => s.id)).toEqual([1, 2]);

    viewer.vm.$emit('select', 1);
    await settle();
    expect(table.props('selectedId')).toBe(1);
    const selected = wrapper.findAll('[data-test="catalogue-table"] tbody tr.selected');
    expect(selected).toHaveLength(1);
    expect(selected[0]!.text()).toContain('20.50');
  });

  it('draws the stored convergence of a finished run across its stages', async () => {
    const diagnostics = {
      residualHistogram: { edges: [-1, 0, 1], counts: [5, 5], mean: 0, std: 1, count: 10 },
      spectrum: {
        k: [1],
        power: [1],
        mapPower: [1],
        modes: [4],
        fitted: [1],
        amplitude: 1,
        slope: 3,
        turnover: 0.1,
        estimated: true,
      },
      convergence: [
        { stage: 'diffuse', iteration: 1, objective: 500, gradNorm: 3 },
        { stage: 'diffuse', iteration: 2, objective: 400, gradNorm: 2 },
        { stage: 'final', iteration: 1, objective: 390, gradNorm: 1 },
      ],
      converged: true,
      iterations: 3,
      evaluations: 5,
      noise: { sigma: 0.0001, source: 'estimated' },
      psfFwhmPx: { major: 4, minor: 3 },
      beamAreaPx: 13.6,
      compactPrior: { alpha: 1.5, q: 0.05, pedestal: 0.03, fluxErrorScale: 1 },
    };
    mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun({ diagnostics }) },
      'GET /api/images/:id': { body: image },
      'GET /api/runs/:id/sources': sourcePage,
    });
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user: owner });
    await settle();
    expect(wrapper.get('[data-test="convergence"]').text()).toContain('3 iterations, converged');
    // The fit checks below draw their own figures: take the convergence chart's last draw.
    const chart = wrapper.get('[data-test="convergence"] [role="img"]').element;
    const calls = plotly.react.mock.calls as unknown as [HTMLElement, { x: number[]; y: number[] }[]][];
    const lastCall = calls.filter((call) => call[0] === chart).at(-1)!;
    expect(lastCall[1][0]!.x).toEqual([1, 2, 3]);
    expect(lastCall[1][0]!.y).toEqual([500, 400, 390]);
    expect(wrapper.find('[data-test="fit-checks"]').exists()).toBe(true);
    const hrefs = wrapper.findAll('[data-test="exports"] a').map((node) => node.attributes('href'));
    expect(hrefs).toContain('/api/runs/42/quicklook.png?component=data');
    // Markers take the PSF size the fit used.
    expect(wrapper.getComponent(SkyViewer).props('sources')?.[0]).toMatchObject({
      majorPixels: 4,
      minorPixels: 3,
    });
  });

  it('shows the server message when the run cannot be read', async () => {
    mockRunsApi({ 'GET /api/runs/:id': apiError(404, 'not_found', 'Run not found.') });
    await mountPage(RunPage, { path: '/runs/42', user: owner });
    expect(pageText()).toContain('Run not found.');
  });

  it('explains a failed run', async () => {
    mockRunsApi({
      'GET /api/runs/:id': {
        body: makeRun({ status: 'failed', errorMessage: 'The image has no valid pixels.' }),
      },
      'GET /api/images/:id': { body: image },
    });
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user: owner });
    expect(wrapper.get('[data-test="run-failed"]').text()).toContain('The image has no valid pixels.');
  });
});
