import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';

import { COMPLETENESS_CAUTION_TEXT, type InjectionStudyDetail, type NumberCounts } from '@shared/injection';
import RunCompletenessPage from '@/pages/RunCompletenessPage.vue';
import RunPage from '@/pages/RunPage.vue';
import { makeUser } from '../support/fixtures';
import { mountPage, pageText, settle, unmountAll } from '../support/mount';
import { makeFinishedRun, makeImageDetail, mockRunsApi } from './runs-support';

const plotly = vi.hoisted(() => ({ react: vi.fn(async () => undefined), purge: vi.fn() }));
vi.mock('plotly.js-dist-min', () => ({ default: plotly }));

beforeEach(() => plotly.react.mockClear());
afterEach(() => {
  unmountAll();
  vi.useRealTimers();
});

const user = makeUser({ id: 1 });

function makeStudy(overrides: Partial<InjectionStudyDetail> = {}): InjectionStudyDetail {
  return {
    id: 5,
    runId: 42,
    createdBy: 1,
    levelKind: 'snr',
    levels: [5, 40],
    fluxes: [0.002, 0.016],
    sourcesPerLevel: 6,
    seed: 7,
    radiusPixels: 9,
    matchRadiusPixels: 1.5,
    status: 'succeeded',
    cancelRequested: false,
    trialsTotal: 3,
    trialsDone: 3,
    errorMessage: null,
    results: {
      levels: [
        {
          level: 0,
          flux: 0.002,
          snr: 5,
          injected: 6,
          recovered: 3,
          completeness: 0.5,
          completenessLow: 0.31,
          completenessHigh: 0.69,
          fluxBias: 0.04,
          fluxBiasErr: 0.03,
          fluxScatter: 0.2,
          pullMedian: 0.1,
          pullScatter: 1.1,
          medianSeparationPixels: 0.4,
        },
        {
          level: 1,
          flux: 0.016,
          snr: 40,
          injected: 6,
          recovered: 6,
          completeness: 1,
          completenessLow: 0.87,
          completenessHigh: 1,
          fluxBias: -0.01,
          fluxBiasErr: 0.01,
          fluxScatter: 0.03,
          pullMedian: 0,
          pullScatter: 0.9,
          medianSeparationPixels: 0.1,
        },
      ],
      falseSources: {
        bins: [
          {
            snrLow: 5,
            snrHigh: 7,
            count: 1,
            countLow: 0.17,
            countHigh: 3.3,
            rate: 625,
            rateLow: 108,
            rateHigh: 2062,
            real: 4,
            reliability: 0.75,
            reliabilityLow: 0.18,
            reliabilityHigh: 0.96,
          },
          {
            snrLow: 50,
            snrHigh: 5e6,
            count: 0,
            countLow: 0,
            countHigh: 1.84,
            rate: 0,
            rateLow: 0,
            rateHigh: 1150,
            real: 0,
            reliability: null,
            reliabilityLow: null,
            reliabilityHigh: null,
          },
        ],
        detections: 2,
        residualsExcluded: 1,
        totalRate: 625,
        totalRateLow: 103,
        totalRateHigh: 2070,
        area: 0.0016,
        areaUnit: 'deg2',
      },
      spuriousInTrials: 0,
      noiseSigma: 1e-4,
      psfFwhmPx: { major: 3, minor: 3 },
      fluxUnit: 'Jy.pixel/beam',
      threshold: 5,
      caution: COMPLETENESS_CAUTION_TEXT,
    },
    createdAt: '2026-03-04T09:05:00.000Z',
    startedAt: '2026-03-04T09:05:01.000Z',
    finishedAt: '2026-03-04T09:05:20.000Z',
    caution: COMPLETENESS_CAUTION_TEXT,
    trials: [
      {
        id: 1,
        trialIndex: 0,
        kind: 'injection',
        level: 0,
        status: 'succeeded',
        attempts: 1,
        injected: [],
        recoveredCount: 3,
        detections: 12,
        errorMessage: null,
      },
      {
        id: 2,
        trialIndex: 1,
        kind: 'injection',
        level: 1,
        status: 'succeeded',
        attempts: 2,
        injected: [],
        recoveredCount: 6,
        detections: 15,
        errorMessage: null,
      },
      {
        id: 3,
        trialIndex: 2,
        kind: 'false-source',
        level: null,
        status: 'succeeded',
        attempts: 1,
        injected: [],
        recoveredCount: null,
        detections: 2,
        errorMessage: null,
      },
    ],
    ...overrides,
  };
}

const counts: NumberCounts = {
  runId: 42,
  areaUnit: 'deg2',
  area: 0.0016,
  fluxUnit: 'Jy.pixel/beam',
  sources: 3,
  studyId: 5,
  bins: [
    {
      fluxLow: 0.01,
      fluxHigh: 0.02,
      fluxCentre: 0.01414,
      count: 3,
      countLow: 1.37,
      countHigh: 5.94,
      perArea: { value: 1875, low: 858, high: 3710 },
      dnds: { value: 187500, low: 85800, high: 371000 },
      completeness: 1,
      corrected: {
        count: 3,
        perArea: { value: 1875, low: 858, high: 3710 },
        dnds: { value: 187500, low: 85800, high: 371000 },
      },
      correctionNote: null,
    },
  ],
  note: 'Densities per deg⁻² over 9216 valid pixels.',
  caution: COMPLETENESS_CAUTION_TEXT,
};

const summary = (study: InjectionStudyDetail) => {
  const { trials: _trials, ...rest } = study;
  return rest;
};

describe('RunCompletenessPage', () => {
  it('shows a finished study: caution, plots, results table, false-source rate, exports and number counts', async () => {
    const study = makeStudy();
    const api = mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun() },
      'GET /api/runs/:id/injection-studies': { body: { studies: [summary(study)] } },
      'GET /api/runs/:id/injection-studies/:studyId': { body: study },
      'GET /api/runs/:id/number-counts': { body: counts },
    });
    const { wrapper } = await mountPage(RunCompletenessPage, { path: '/runs/42/completeness', user });
    await settle();
    expect(wrapper.get('[data-test="completeness-caution"]').text()).toContain(
      'hold for this image and these settings only',
    );
    expect(wrapper.get('[data-test="study-status"]').text()).toBe('Finished');
    expect(wrapper.get('[data-test="study-progress"]').text()).toContain('3 of 3 trial separations done');
    const table = wrapper.get('[data-test="results-table"]').text();
    expect(table).toContain('3 / 6');
    expect(table).toContain('0.50 (0.31–0.69)');
    expect(table).toContain('1.00 (0.87–1.00)');
    expect(wrapper.get('[data-test="false-rate"]').text()).toMatch(/625 deg⁻².*103–2\.07e\+3/);
    const reliability = wrapper.get('[data-test="reliability"]').text();
    expect(reliability).toContain('5.00–7.00');
    expect(reliability).toContain('0.75 (0.18–0.96)');
    expect(reliability).toContain('50.0 and above');
    const links = wrapper.findAll('[data-test="study-exports"] a').map((a) => a.attributes('href'));
    expect(links).toContain('/api/runs/42/injection-studies/5/export?table=completeness&format=csv');
    expect(links).toContain('/api/runs/42/injection-studies/5/export?table=false-sources&format=fits');
    // Completeness, bias and the number counts are drawn.
    await vi.waitFor(() => expect(plotly.react).toHaveBeenCalledTimes(3), { timeout: 5000 });
    expect(wrapper.get('[data-test="counts-table"]').text()).toContain('1.88e+3');
    expect(api.callsTo('GET /api/runs/:id/number-counts')[0]!.query.get('bins')).toBe('8');
    api.expectNoUnexpectedCalls();
  });

  it('starts a study with the levels typed, then follows it until it ends', async () => {
    vi.useFakeTimers({ shouldAdvanceTime: true });
    let polls = 0;
    let created = false;
    const running = makeStudy({ status: 'running', trialsDone: 1, results: null });
    const api = mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun() },
      'GET /api/runs/:id/injection-studies': () => ({
        body: { studies: created ? [summary(running)] : [] },
      }),
      'POST /api/runs/:id/injection-studies': () => {
        created = true;
        return { status: 202, body: summary(running) };
      },
      'GET /api/runs/:id/injection-studies/:studyId': () => {
        polls++;
        return { body: polls > 1 ? makeStudy() : running };
      },
      'GET /api/runs/:id/number-counts': { body: { ...counts, studyId: null } },
    });
    const { wrapper } = await mountPage(RunCompletenessPage, { path: '/runs/42/completeness', user });
    await settle();
    expect(pageText()).toContain('No injection study of this run yet.');
    await wrapper.get('input[data-test="levels"]').setValue('40, 5, x');
    expect(pageText()).toContain('“x” is not a positive number.');
    expect(wrapper.get('[data-test="start-study"]').attributes('disabled')).toBeDefined();
    await wrapper.get('input[data-test="levels"]').setValue('40 5');
    // Each number input shows its own error and blocks the start until it is corrected.
    await wrapper.get('input[data-test="radius"]').setValue('2');
    expect(pageText()).toContain('The distance must be from 3 to 10 FWHM.');
    await wrapper.get('input[data-test="seed"]').setValue('1.5');
    expect(pageText()).toContain('The seed must be a whole number.');
    expect(wrapper.get('[data-test="start-study"]').attributes('disabled')).toBeDefined();
    await wrapper.get('input[data-test="radius"]').setValue('3');
    await wrapper.get('input[data-test="sources-per-level"]').setValue('6');
    await wrapper.get('input[data-test="seed"]').setValue('7');
    await wrapper.get('[data-test="study-form"]').trigger('submit');
    await settle();
    expect(api.callsTo('POST /api/runs/:id/injection-studies')[0]!.body).toEqual({
      levelKind: 'snr',
      levels: [5, 40],
      sourcesPerLevel: 6,
      seed: 7,
      radiusFwhm: 3,
    });
    await vi.waitFor(() => expect(wrapper.find('[data-test="study-status"]').exists()).toBe(true));
    expect(wrapper.get('[data-test="study-status"]').text()).toBe('Separating trial images');
    expect(wrapper.get('[data-test="study-progress"]').text()).toContain('1 of 3');
    await vi.advanceTimersByTimeAsync(2100);
    await settle();
    expect(wrapper.get('[data-test="study-status"]').text()).toBe('Finished');
    expect(wrapper.find('[data-test="results-table"]').exists()).toBe(true);
    api.expectNoUnexpectedCalls();
  });

  it('deletes a finished study after a confirmation', async () => {
    const study = makeStudy();
    let deleted = false;
    const api = mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun() },
      'GET /api/runs/:id/injection-studies': () => ({ body: { studies: deleted ? [] : [summary(study)] } }),
      'GET /api/runs/:id/injection-studies/:studyId': { body: study },
      'DELETE /api/runs/:id/injection-studies/:studyId': () => {
        deleted = true;
        return { status: 204 };
      },
      'GET /api/runs/:id/number-counts': { body: counts },
    });
    const { wrapper } = await mountPage(RunCompletenessPage, { path: '/runs/42/completeness', user });
    await settle();
    await wrapper.get('[data-test="delete-study"]').trigger('click');
    await settle();
    expect(pageText()).toContain('Its trials and results are removed; the run itself stays.');
    const ok = [...document.querySelectorAll('.q-dialog button')].find((b) =>
      b.textContent?.includes('Delete'),
    );
    (ok as HTMLButtonElement).click();
    await settle();
    await vi.waitFor(() =>
      expect(api.callsTo('DELETE /api/runs/:id/injection-studies/:studyId')).toHaveLength(1),
    );
    expect(api.callsTo('DELETE /api/runs/:id/injection-studies/:studyId')[0]!.path).toBe(
      '/api/runs/42/injection-studies/5',
    );
    await vi.waitFor(() => expect(pageText()).toContain('No injection study of this run yet.'));
    api.expectNoUnexpectedCalls();
  });

  it('shows a failed study with its message, and no form for viewers', async () => {
    const failed = makeStudy({
      status: 'failed',
      results: null,
      errorMessage: 'Trial 2 of 3 failed: the fit diverged',
    });
    const api = mockRunsApi(
      {
        'GET /api/runs/:id': { body: makeFinishedRun() },
        'GET /api/runs/:id/injection-studies': { body: { studies: [summary(failed)] } },
        'GET /api/runs/:id/injection-studies/:studyId': { body: failed },
        'GET /api/runs/:id/number-counts': { body: { ...counts, studyId: null } },
      },
      'viewer',
    );
    const { wrapper } = await mountPage(RunCompletenessPage, { path: '/runs/42/completeness', user });
    await settle();
    expect(wrapper.get('[data-test="study-error"]').text()).toBe('Trial 2 of 3 failed: the fit diverged');
    expect(wrapper.find('[data-test="study-form"]').exists()).toBe(false);
    expect(wrapper.find('[data-test="delete-study"]').exists()).toBe(false);
    api.expectNoUnexpectedCalls();
  });

  it('says that a run must succeed first', async () => {
    const api = mockRunsApi({ 'GET /api/runs/:id': { body: makeFinishedRun({ status: 'failed' }) } });
    const { wrapper } = await mountPage(RunCompletenessPage, { path: '/runs/42/completeness', user });
    await settle();
    expect(wrapper.get('[data-test="run-not-finished"]').text()).toContain('this run is failed');
    api.expectNoUnexpectedCalls();
  });

  it('is reached from a finished run by the Completeness button, which a running run does not show', async () => {
    vi.stubGlobal(
      'EventSource',
      class {
        addEventListener() {}
        close() {}
      },
    );
    const sources = { body: { sources: [], page: 1, pageSize: 25, total: 0, caution: 'Model-dependent.' } };
    mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun() },
      'GET /api/images/:id': { body: makeImageDetail() },
      'GET /api/runs/:id/sources': sources,
    });
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user });
    await settle();
    expect(wrapper.get('[data-test="completeness-link"]').attributes('href')).toBe('/runs/42/completeness');
    unmountAll();
    mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun({ status: 'running' }) },
      'GET /api/images/:id': { body: makeImageDetail() },
    });
    const running = await mountPage(RunPage, { path: '/runs/42', user });
    await settle();
    expect(running.wrapper.find('[data-test="completeness-link"]').exists()).toBe(false);
  });
});
