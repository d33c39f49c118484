import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';

import ComparisonPage from '@/pages/ComparisonPage.vue';
import SkyViewer from '@/components/viewer/SkyViewer.vue';
import { apiError, type MockRequest } from '../support/api-mock';
import { makeUser } from '../support/fixtures';
import { makeSource } from '../runs/runs-support';
import { mountPage, notifications, pageText, settle, unmountAll } from '../support/mount';
import {
  makeComparison,
  makeCrossMatch,
  mockComparisonApi,
  PLANE_WIDTH,
  planeValue,
} from './comparison-support';

const plotly = vi.hoisted(() => ({ react: vi.fn(async () => undefined), purge: vi.fn() }));
vi.mock('plotly.js-dist-min', () => ({ default: plotly }));

beforeEach(() => plotly.react.mockClear());
afterEach(unmountAll);

const editor = makeUser({ id: 1 });
const someoneElse = makeUser({ id: 9 });

function routes(overrides: Record<string, unknown> = {}) {
  return {
    'GET /api/comparisons/:id': { body: makeComparison() },
    'GET /api/comparisons/:id/cross-match': { body: makeCrossMatch() },
    'GET /api/runs/:id/sources': (request: MockRequest) => ({
      body: {
        sources: [makeSource({ id: Number(request.params.id) - 40, x: 5, y: 6, flux: 0.01, fluxErr: 0.001 })],
        page: 1,
        pageSize: Number(request.query.get('pageSize')),
        total: request.params.id === '43' ? 1500 : 1,
        caution: 'Model-dependent catalogue.',
      },
    }),
    ...overrides,
  };
}

async function open(role: 'owner' | 'editor' | 'viewer' = 'editor', overrides = {}, user = editor) {
  const api = mockComparisonApi(routes(overrides) as never, role);
  const mounted = await mountPage(ComparisonPage, { path: '/comparisons/5', user });
  await settle();
  return { api, ...mounted };
}

describe('ComparisonPage', () => {
  it('shows the settings that differ, a linked panel per run and the difference of the first two', async () => {
    const { api, wrapper } = await open();
    expect(wrapper.find('[data-test="comparison-name"]').text()).toBe('Threshold 5 against 8');
    const table = wrapper.find('[data-test="settings-difference"]');
    expect(table.findAll('thead th').map((th) => th.text())).toEqual([
      'Setting',
      'Run 42 (balanced)',
      'Run 43 (deep-search)',
    ]);
    expect(table.find('[data-test="setting-threshold"]').text()).toContain('Detection threshold (SNR)');
    expect(
      table
        .find('[data-test="setting-noiseSigma"]')
        .findAll('td')
        .map((td) => td.text()),
    ).toEqual(['estimated from the data', '0.0001']);

    // The runs' diffuse planes and the difference 42 − 43, each asked once at the panel size.
    const paths = api.planeCalls.map((call) => `${call.path}?${call.query.toString()}`).sort();
    expect(paths).toEqual(
      [
        '/api/comparisons/5/difference?a=42&b=43&maxSize=768',
        '/api/runs/42/components/diffuse?format=float32&maxSize=768',
        '/api/runs/43/components/diffuse?format=float32&maxSize=768',
      ].sort(),
    );
    const viewers = wrapper.findAllComponents(SkyViewer);
    expect(viewers).toHaveLength(3);
    const [first, second, difference] = viewers;
    expect(first!.props('label')).toBe('Diffuse of Run 42 (balanced)');
    expect(first!.props('plane')!.data[5]).toBeCloseTo(planeValue(42, 5), 5);
    expect(second!.props('plane')!.data[5]).toBeCloseTo(planeValue(43, 5), 5);
    expect(difference!.props()).toMatchObject({
      colourMaps: ['seesaw'],
      initialColourMap: 'seesaw',
      symmetricLimits: true,
      initialStretch: 'linear',
    });
    expect(difference!.props('plane')!.width).toBe(PLANE_WIDTH);
    // Mock difference: (42 − 43) + (k mod 7)/100 − 0.03, so the largest |value| is 1.03 (Jy/beam, the image unit).
    expect(wrapper.find('[data-test="difference-note"]').text()).toMatch(
      /^Largest \|difference\| 1\.03 Jy\/beam/,
    );
    // Sources found by only one run are marked on the difference.
    expect(difference!.props('sources')).toEqual([
      expect.objectContaining({ id: 'a-4', x: 20, y: 15, label: 'Only in Run 42 (balanced): source 4' }),
    ]);
    api.expectNoUnexpectedCalls();
  });

  it("marks each run's own sources on its panel, and can hide them", async () => {
    const { api, wrapper } = await open();
    const queries = api.callsTo('GET /api/runs/:id/sources').map((call) => `${call.path}?${call.query}`);
    expect(queries.sort()).toEqual([
      '/api/runs/42/sources?page=1&pageSize=1000&sort=-snr',
      '/api/runs/43/sources?page=1&pageSize=1000&sort=-snr',
    ]);
    const panels = () => wrapper.findAllComponents(SkyViewer).slice(0, 2);
    expect(panels().map((viewer) => viewer.props('sources')!.map((marker) => marker.label))).toEqual([
      ['Run 42 (balanced): source 2'],
      ['Run 43 (deep-search): source 3'],
    ]);
    // Run 43 has more sources than are marked: the page says so.
    expect(pageText()).toContain('Markers show the 1000 sources of highest SNR of Run 43 (deep-search).');
    await wrapper.find('[data-test="show-sources"]').trigger('click');
    await settle();
    expect(panels().map((viewer) => viewer.props('sources'))).toEqual([[], []]);
  });

  it('links pan, zoom and cursor between every viewer', async () => {
    const { wrapper } = await open();
    const viewers = wrapper.findAllComponents(SkyViewer);
    const view = { centreX: 12, centreY: 9, zoom: 3 };
    viewers[0]!.vm.$emit('update:view', view);
    viewers[1]!.vm.$emit('update:cursor', { x: 4, y: 6 });
    await settle();
    for (const viewer of wrapper.findAllComponents(SkyViewer)) {
      expect(viewer.props('view')).toEqual(view);
      expect(viewer.props('cursor')).toEqual({ x: 4, y: 6 });
    }
  });

  it('summarises the cross-match and plots flux against flux with both error bars and the 1:1 line', async () => {
    const { wrapper } = await open();
    const summary = wrapper.find('[data-test="cross-match-summary"]').text();
    expect(summary).toContain('Matched3');
    expect(summary).toContain('Only in Run 42 (balanced)1 of 4');
    expect(summary).toContain('Only in Run 43 (deep-search)0 of 3');
    expect(summary).toContain('2.25″ (half the beam FWHM, on the sky)');
    expect(summary).toContain('0.952 ± 0.031');
    // Fewer than five pairs: the page warns that the statistics are weak.
    expect(wrapper.find('[data-test="cross-match-cautions"]').text()).toContain('Only 3 matched source(s)');
    expect(plotly.react).toHaveBeenCalledTimes(1);
    const [, traces, layout] = plotly.react.mock.calls[0] as unknown as [
      unknown,
      {
        x: number[];
        y: number[];
        error_x?: { array: number[] };
        error_y?: { array: number[] };
        name: string;
      }[],
      { xaxis: { type: string; title: { text: string } }; yaxis: { title: { text: string } } },
    ];
    const match = makeCrossMatch();
    const line = traces.find((trace) => trace.name === '1:1')!;
    expect(line.x).toEqual(line.y);
    const points = traces.find((trace) => trace.name === 'matched sources')!;
    expect(points.x).toEqual(match.pairs.map((pair) => pair.b.flux));
    expect(points.y).toEqual(match.pairs.map((pair) => pair.a.flux));
    expect(points.error_x!.array).toEqual(match.pairs.map((pair) => pair.b.fluxErr));
    expect(points.error_y!.array).toEqual(match.pairs.map((pair) => pair.a.fluxErr));
    // The 1:1 line spans every point with its error bar.
    const ends = match.pairs.flatMap((pair) => [pair.a.flux - pair.a.fluxErr, pair.b.flux + pair.b.fluxErr]);
    expect(line.x[0]).toBeLessThanOrEqual(Math.min(...ends));
    expect(line.x[1]).toBeGreaterThanOrEqual(Math.max(...ends));
    expect(layout.xaxis.type).toBe('log');
    expect(layout.yaxis.title.text).toBe('Run 42 (balanced): flux density (Jy)');
  });

  it('lists the sources found by one run only; Show centres every viewer on one', async () => {
    const { wrapper } = await open();
    const table = wrapper.find('[data-test="unmatched-sources"]');
    expect(table.find('h4').text()).toBe('Found by one run only (1)');
    expect(
      table
        .findAll('tbody td')
        .map((td) => td.text())
        .slice(0, 5),
    ).toEqual(['Run 42 (balanced)', '4', '20.0, 15.0', '0.00300 ± 0.00060', '5.0']);
    await table
      .find('button[aria-label="Show source 4 of Run 42 (balanced) in the viewers"]')
      .trigger('click');
    await settle();
    for (const viewer of wrapper.findAllComponents(SkyViewer)) {
      expect(viewer.props('view')).toMatchObject({ centreX: 20, centreY: 15 });
      expect(viewer.props('view')!.zoom).toBeGreaterThanOrEqual(2);
      expect(viewer.props('cursor')).toEqual({ x: 20, y: 15 });
    }
  });

  it('choosing another pair asks for its difference and cross-match', async () => {
    const crossMatch = vi.fn((request: MockRequest) => ({
      body: makeCrossMatch({ a: Number(request.query.get('a')), b: Number(request.query.get('b')) }),
    }));
    const { api, wrapper } = await open('editor', { 'GET /api/comparisons/:id/cross-match': crossMatch });
    const all = wrapper.findAllComponents({ name: 'QSelect' });
    const selects = ['First run', 'Second run'].map((label) => all.find((s) => s.props('label') === label));
    selects[0]!.vm.$emit('update:modelValue', 43);
    selects[1]!.vm.$emit('update:modelValue', 42);
    await settle();
    expect(crossMatch.mock.calls.at(-1)![0].query.toString()).toBe('a=43&b=42');
    expect(api.planeCalls.at(-1)!.query.toString()).toBe('a=43&b=42&maxSize=768');
    selects[1]!.vm.$emit('update:modelValue', 43);
    await settle();
    expect(wrapper.find('[data-test="pair-problem"]').text()).toBe('Choose two different runs.');
  });

  it('editors rename it and save the component they choose; the panels follow', async () => {
    const patches: unknown[] = [];
    const patch = (request: MockRequest) => {
      patches.push(request.body);
      const body = request.body as { name?: string; component?: string };
      const { runs: _runs, settingsDifference: _diff, note: _note, ...summary } = makeComparison();
      return {
        body: { ...summary, name: body.name ?? summary.name, component: body.component ?? 'diffuse' },
      };
    };
    const { api, wrapper } = await open('editor', { 'PATCH /api/comparisons/:id': patch });
    await wrapper.find('input[data-test="comparison-rename"]').setValue('Deep against balanced');
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(patches).toEqual([{ name: 'Deep against balanced' }]);
    expect(wrapper.find('[data-test="comparison-name"]').text()).toBe('Deep against balanced');

    const toggle = wrapper.findComponent({ name: 'QBtnToggle' });
    toggle.vm.$emit('update:modelValue', 'residual');
    await settle();
    expect(patches.at(-1)).toEqual({ component: 'residual' });
    const residualCalls = api.planeCalls.filter((call) => call.path.endsWith('/components/residual'));
    expect(residualCalls.map((call) => call.path).sort()).toEqual([
      '/api/runs/42/components/residual',
      '/api/runs/43/components/residual',
    ]);
    expect(wrapper.findAllComponents(SkyViewer)[0]!.props('label')).toBe('Residual of Run 42 (balanced)');
  });

  it('a refused rename puts the old name back and shows the reason', async () => {
    const { wrapper } = await open('editor', {
      'PATCH /api/comparisons/:id': apiError(
        403,
        'forbidden',
        'Only project owners and editors can change comparisons.',
      ),
    });
    await wrapper.find('input[data-test="comparison-rename"]').setValue('Another name');
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(wrapper.find('[data-test="comparison-name"]').text()).toBe('Threshold 5 against 8');
    expect(notifications().join(' ')).toContain('Only project owners and editors can change comparisons.');
  });

  it('viewers look without saving: no rename, no delete, the component choice stays local', async () => {
    const { api, wrapper } = await open('viewer', {}, someoneElse);
    expect(wrapper.find('[data-test="comparison-rename"]').exists()).toBe(false);
    expect(wrapper.find('[data-test="delete-comparison"]').exists()).toBe(false);
    expect(pageText()).toContain('The component you pick here is not saved.');
    wrapper.findComponent({ name: 'QBtnToggle' }).vm.$emit('update:modelValue', 'compact');
    await settle();
    expect(api.planeCalls.some((call) => call.path === '/api/runs/42/components/compact')).toBe(true);
    api.expectNoUnexpectedCalls();
  });

  it('deletes after a confirmation and goes back to the project', async () => {
    const { api, wrapper, router } = await open('editor', { 'DELETE /api/comparisons/:id': { status: 204 } });
    await wrapper.find('[data-test="delete-comparison"]').trigger('click');
    await settle();
    expect(pageText()).toContain('The runs themselves stay; only this saved comparison goes.');
    const confirm = [...document.querySelectorAll<HTMLButtonElement>('.q-dialog button')].find(
      (button) => button.textContent?.trim() === 'Delete',
    );
    confirm!.click();
    await settle();
    expect(api.callsTo('DELETE /api/comparisons/:id').map((call) => call.path)).toEqual([
      '/api/comparisons/5',
    ]);
    expect(router.currentRoute.value.fullPath).toBe('/projects/7');
    expect(notifications().join(' ')).toContain('Comparison deleted.');
  });

  it('lets the member who saved it delete it even as a viewer', async () => {
    const { wrapper } = await open('viewer', {}, editor);
    expect(wrapper.find('[data-test="delete-comparison"]').exists()).toBe(true);
    expect(wrapper.find('[data-test="comparison-rename"]').exists()).toBe(false);
  });

  it('copies its own address as the link to share', async () => {
    const writeText = vi.fn(async () => undefined);
    vi.stubGlobal('navigator', { ...globalThis.navigator, clipboard: { writeText } });
    const { wrapper } = await open();
    await wrapper.find('[data-test="copy-link"]').trigger('click');
    await settle();
    expect(writeText).toHaveBeenCalledWith(`${window.location.origin}/comparisons/5`);
    expect(notifications().join(' ')).toContain('Members of this project can open it.');
  });

  it('says when runs were deleted, and what a missing comparison looks like', async () => {
    const { wrapper } = await open('editor', {
      'GET /api/comparisons/:id': {
        body: makeComparison({
          runCount: 3,
          note: 'One run of this comparison was deleted since it was saved.',
        }),
      },
    });
    expect(wrapper.find('[data-test="comparison-note"]').text()).toContain(
      'One run of this comparison was deleted',
    );
    unmountAll();
    await open('editor', { 'GET /api/comparisons/:id': apiError(404, 'not_found', 'Comparison not found.') });
    expect(pageText()).toContain('Comparison not found.');
    expect(pageText()).toContain('Try again');
  });
});
