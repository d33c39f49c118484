import { afterEach, describe, expect, it } from 'vitest';

import { separationPresetSchema, separationSettingsInputSchema } from '@shared/separation-settings';
import RunSetupPage from '@/pages/RunSetupPage.vue';
import { estimateRunSeconds } from '@/stores/runs';
import { apiError } from '../support/api-mock';
import { makeUser } from '../support/fixtures';
import { mountPage, pageText, settle, unmountAll } from '../support/mount';
import { makeFinishedRun, makeImageDetail, mockRunsApi } from './runs-support';

afterEach(unmountAll);

const owner = makeUser({ id: 1 });
const image = makeImageDetail({ width: 2048, height: 1024 });

/** The message the shared zod schema gives for one settings object (the form must show exactly it). */
function schemaMessage(settings: unknown): string {
  const result = separationSettingsInputSchema.safeParse(settings);
  if (result.success) throw new Error(`expected ${JSON.stringify(settings)} to be refused`);
  return result.error.issues[0]!.message;
}

async function mountSetup(routes = {}) {
  const api = mockRunsApi({
    'GET /api/images/:id': { body: image },
    'GET /api/images/:id/runs': { body: { runs: [makeFinishedRun({ id: 40, sourceCount: 17 })] } },
    ...routes,
  });
  const mounted = await mountPage(RunSetupPage, { path: '/images/11/runs/new', user: owner });
  return { api, ...mounted };
}

describe('RunSetupPage', () => {
  it('shows every preset with its description from the shared schema, and a marked run-time estimate', async () => {
    const { api, wrapper } = await mountSetup();
    const text = pageText();
    expect(separationPresetSchema.options.length).toBe(3);
    for (const name of separationPresetSchema.options) expect(text).toContain(name.replace(/-/g, ' '));
    expect(text).toContain('works on most images');
    expect(text).toContain('tries harder to find faint sources');
    expect(text).toContain('2048 × 1024 pixels');
    // The estimate printed is the one from the stated rule, and it says that it is an estimate.
    const seconds = estimateRunSeconds(2048, 1024, 300, 2);
    const expected =
      seconds < 90 ? `about ${Math.round(seconds)} s` : `about ${Math.round(seconds / 60)} min`;
    expect(text).toContain(`Estimated run time: ${expected}`);
    expect(text).toContain('rough estimate');
    expect(api.callsTo('GET /api/images/:id')[0]?.params.id).toBe('11');
    expect(wrapper.get('[data-test="earlier-runs"]').text()).toContain('Run 40');
    expect(wrapper.get('[data-test="earlier-runs"]').text()).toContain('succeeded · 17 sources');
    api.expectNoUnexpectedCalls();
  });

  it('the estimate grows with the image size, and with the iteration budget only while the budget is short', () => {
    const small = estimateRunSeconds(512, 512, 300, 2);
    const large = estimateRunSeconds(2048, 2048, 300, 2);
    // N log N on the padded grid (1.5625 × the pixels): 16× the pixels and the log2 ratio of the padded sizes.
    const logRatio = Math.log2(1.5625 * 2048 * 2048) / Math.log2(1.5625 * 512 * 512);
    expect(large / small).toBeCloseTo(16 * logRatio, 6);
    // a fit usually settles before a 300-iteration budget is spent: doubling it changes nothing …
    expect(estimateRunSeconds(512, 512, 600, 2)).toBeCloseTo(small, 9);
    // … but a budget of 20 iterations ends it sooner
    expect(estimateRunSeconds(512, 512, 20, 2)).toBeLessThan(0.5 * small);
    // another seeding round costs more
    expect(estimateRunSeconds(512, 512, 300, 3)).toBeGreaterThan(small);
  });

  it('shows the schema messages for a bad threshold and a PSF whose minor axis exceeds its major', async () => {
    const { wrapper, api } = await mountSetup();
    await wrapper.get('[data-test="advanced-toggle"]').trigger('click');
    await settle();
    await wrapper.get('input[data-test="threshold"]').setValue('0');
    await settle();
    expect(pageText()).toContain(schemaMessage({ threshold: 0 }));
    expect(wrapper.get('[data-test="launch"]').attributes('disabled')).toBeDefined();

    await wrapper.get('input[data-test="threshold"]').setValue('five');
    await settle();
    expect(pageText()).toContain('Enter a number, or leave the field empty.');
    await wrapper.get('input[data-test="threshold"]').setValue('6');
    const given = wrapper
      .findAll('[data-test="psf-source"] .q-radio')
      .find((node) => node.text() === 'Given FWHM');
    await given!.trigger('click');
    await settle();
    await wrapper.get('input[data-test="fwhm-major"]').setValue('3');
    await wrapper.get('input[data-test="fwhm-minor"]').setValue('4');
    await settle();
    expect(pageText()).toContain('PSF minor-axis FWHM must not exceed the major-axis FWHM');
    expect(wrapper.get('[data-test="launch"]').attributes('disabled')).toBeDefined();
    expect(api.callsTo('POST /api/images/:id/runs')).toHaveLength(0);
  });

  it('launches the chosen settings and goes to the run page', async () => {
    const { wrapper, router, api } = await mountSetup({
      'POST /api/images/:id/runs': { status: 202, body: { id: 42, status: 'queued' } },
    });
    const deep = wrapper
      .findAll('[data-test="preset"] .q-radio')
      .find((node) => node.text().includes('deep search'));
    await deep!.trigger('click');
    await wrapper.get('[data-test="advanced-toggle"]').trigger('click');
    await settle();
    await wrapper.get('input[data-test="threshold"]').setValue('6.5');
    await settle();
    await wrapper.get('form').trigger('submit');
    await settle();
    const posts = api.callsTo('POST /api/images/:id/runs');
    expect(posts).toHaveLength(1);
    expect(posts[0]!.params.id).toBe('11');
    // The image has a beam, so no PSF is sent (the server takes it from BMAJ/BMIN/BPA).
    expect(posts[0]!.body).toEqual({ settings: { preset: 'deep-search', threshold: 6.5 } });
    expect(router.currentRoute.value.fullPath).toBe('/runs/42');
    api.expectNoUnexpectedCalls();
  });

  it("shows the server's refusal beside the form and stays", async () => {
    const { wrapper, router } = await mountSetup({
      'POST /api/images/:id/runs': apiError(
        413,
        'payload_too_large',
        'The results would not fit your storage quota.',
      ),
    });
    await wrapper.get('form').trigger('submit');
    await settle();
    expect(wrapper.get('[data-test="form-error"]').text()).toBe(
      'The results would not fit your storage quota.',
    );
    expect(router.currentRoute.value.fullPath).toBe('/images/11/runs/new');
  });

  it('shows an error state when the image cannot be read', async () => {
    mockRunsApi({
      'GET /api/images/:id': apiError(404, 'not_found', 'Image not found.'),
      'GET /api/images/:id/runs': apiError(404, 'not_found', 'Image not found.'),
    });
    await mountPage(RunSetupPage, { path: '/images/11/runs/new', user: owner });
    expect(pageText()).toContain('Image not found.');
  });
});
