import { afterEach, describe, expect, it } from 'vitest';

import type { RunSummary } from '@shared/runs';
import RunComparePicker from '@/components/comparisons/RunComparePicker.vue';
import { apiError, mockApi } from '../support/api-mock';
import { makeUser } from '../support/fixtures';
import { mountPage, notifications, settle, unmountAll } from '../support/mount';
import { makeComparison } from './comparison-support';
import { makeFinishedRun, makeRun } from '../runs/runs-support';

afterEach(unmountAll);

const summary = (run: ReturnType<typeof makeRun>): RunSummary => {
  const {
    requestedSettings: _r,
    settings: _s,
    settingsDigest: _d,
    provenance: _p,
    diagnostics: _g,
    components: _c,
    resultBytes: _b,
    ...rest
  } = run;
  return rest;
};
const finished = [44, 43, 42, 41, 40].map((id) => summary(makeFinishedRun({ id, sourceCount: id - 30 })));
const queued = summary(makeRun({ id: 45, status: 'queued' }));

async function openPicker(runs: RunSummary[], canCreate = true, extra = {}) {
  const api = mockApi({ 'GET /api/images/:id/runs': { body: { runs } }, ...extra });
  const mounted = await mountPage(RunComparePicker, {
    user: makeUser({ id: 1 }),
    props: { imageId: 11, projectId: 7, imageName: 'ldf-l-band', canCreate },
  });
  // Nothing is read until the section is opened.
  expect(api.calls.filter((call) => call.path.endsWith('/runs'))).toHaveLength(0);
  await mounted.wrapper.find('[data-test="run-compare-picker"] .q-item').trigger('click');
  await settle();
  return { api, ...mounted };
}

const checkbox = (wrapper: Awaited<ReturnType<typeof openPicker>>['wrapper'], id: number) =>
  wrapper.find(`[data-test="compare-run-${id}"] .q-checkbox`);

describe('RunComparePicker', () => {
  it('lists the finished runs only, and saves the chosen ones in the order chosen', async () => {
    const { api, wrapper, router } = await openPicker([queued, ...finished], true, {
      'POST /api/projects/:id/comparisons': { status: 201, body: makeComparison({ id: 9 }) },
    });
    expect(wrapper.find('[data-test="compare-run-45"]').exists()).toBe(false);
    expect(wrapper.find('[data-test="compare-run-44"]').text()).toContain('14 sources');
    const button = () => wrapper.find('[data-test="compare-button"]');
    expect(button().attributes('disabled')).toBeDefined();
    expect(wrapper.find('[data-test="compare-problem"]').text()).toBe(
      'Choose between 2 and 4 runs to compare (0 chosen).',
    );
    await checkbox(wrapper, 42).trigger('click');
    await checkbox(wrapper, 44).trigger('click');
    await settle();
    expect(wrapper.find('[data-test="compare-run-42"]').text()).toContain('panel 1');
    expect(wrapper.find('[data-test="compare-run-44"]').text()).toContain('panel 2');
    expect(button().attributes('disabled')).toBeUndefined();
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(api.callsTo('POST /api/projects/:id/comparisons').map((call) => [call.path, call.body])).toEqual([
      ['/api/projects/7/comparisons', { name: 'ldf-l-band: runs 42, 44', runIds: [42, 44] }],
    ]);
    expect(router.currentRoute.value.fullPath).toBe('/comparisons/9');
    api.expectNoUnexpectedCalls();
  });

  it('stops at four runs', async () => {
    const { wrapper } = await openPicker(finished);
    for (const id of [40, 41, 42, 43]) await checkbox(wrapper, id).trigger('click');
    await settle();
    expect(checkbox(wrapper, 44).classes()).toContain('disabled');
    expect(wrapper.find('[data-test="compare-problem"]').exists()).toBe(false);
  });

  it("keeps the choice and shows the server's reason when saving is refused", async () => {
    const { wrapper, router } = await openPicker(finished, true, {
      'POST /api/projects/:id/comparisons': apiError(
        422,
        'unprocessable',
        'Run 44 is still queued; only runs that have succeeded can be compared.',
      ),
    });
    await checkbox(wrapper, 43).trigger('click');
    await checkbox(wrapper, 44).trigger('click');
    await wrapper.find('input[data-test="compare-name"]').setValue('Mine');
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(notifications().join(' ')).toContain('Run 44 is still queued');
    expect(router.currentRoute.value.fullPath).not.toContain('/comparisons/');
    expect(wrapper.find('[data-test="compare-run-44"]').text()).toContain('panel 2');
  });

  it('explains when there is too little to compare, and that viewers cannot save', async () => {
    const few = await openPicker([queued, finished[0]!]);
    expect(few.wrapper.find('[data-test="compare-too-few"]').text()).toBe(
      'Only one run of this image has finished; a comparison needs at least two.',
    );
    unmountAll();
    const viewer = await openPicker(finished, false);
    expect(viewer.wrapper.find('[data-test="compare-viewer-note"]').exists()).toBe(true);
    expect(viewer.wrapper.find('[data-test="compare-button"]').exists()).toBe(false);
  });

  it('shows a failure to read the runs with a retry', async () => {
    const { wrapper } = await openPicker([], true, {
      'GET /api/images/:id/runs': apiError(404, 'not_found', 'Image not found.'),
    });
    expect(wrapper.find('[role="alert"]').text()).toContain('Image not found.');
  });
});
