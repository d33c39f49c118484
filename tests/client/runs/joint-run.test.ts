/**
 * Joint runs in the workspace: the form's rows and the request they make (checked against the shared schema
 * the server validates with), the setup page (order with the reference first, per-image options, the server's
 * refusal shown as is), the view link between images on different grids, and the run page's joint panel (scale
 * factors with errors, a plane of every image fetched by its position).
 */
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';

import { createJointRunRequestSchema, type JointRunInfo } from '@shared/joint-runs';
import type { HeaderCardDto } from '@shared/images';
import JointRunPanel from '@/components/runs/JointRunPanel.vue';
import { emptyRow, jointRequest, moveRow, rowIssues } from '@/components/runs/joint-run-form';
import { gridLink } from '@/components/runs/joint-view-link';
import ComparisonPage from '@/pages/ComparisonPage.vue';
import ImageLibraryPage from '@/pages/ImageLibraryPage.vue';
import JointRunSetupPage from '@/pages/JointRunSetupPage.vue';
import RunPage from '@/pages/RunPage.vue';
import RunSetupPage from '@/pages/RunSetupPage.vue';
import { apiError, type MockRequest } from '../support/api-mock';
import { makeComparison, makeCrossMatch, mockComparisonApi } from '../comparisons/comparison-support';
import { makeUser } from '../support/fixtures';
import { mountPage, pageText, settle, unmountAll } from '../support/mount';
import { makeImage, mockLibraryApi } from '../images/library-support';
import { FakeEventSource, makeFinishedRun, makeImageDetail, makeSource, mockRunsApi } from './runs-support';

const plotly = vi.hoisted(() => ({ react: vi.fn(async () => undefined), purge: vi.fn() }));
vi.mock('plotly.js-dist-min', () => ({ default: plotly }));

beforeEach(() => {
  FakeEventSource.instances = [];
  vi.stubGlobal('EventSource', FakeEventSource);
});

afterEach(unmountAll);

/** A TAN header of the Lyra Deep Field with `arcsec` pixels and the tangent point at pixel centre `crpix`. */
function tanHeader(arcsec: number, crpix: number): HeaderCardDto[] {
  return [
    { keyword: 'CTYPE1', value: 'RA---TAN' },
    { keyword: 'CTYPE2', value: 'DEC--TAN' },
    { keyword: 'CRPIX1', value: crpix },
    { keyword: 'CRPIX2', value: crpix },
    { keyword: 'CRVAL1', value: 279.2 },
    { keyword: 'CRVAL2', value: 38.8 },
    { keyword: 'CDELT1', value: -arcsec / 3600 },
    { keyword: 'CDELT2', value: arcsec / 3600 },
    { keyword: 'RADESYS', value: 'ICRS' },
  ];
}

describe('joint-run form', () => {
  it('turns the rows into a request the server schema accepts, the reference first', () => {
    const rows = [
      emptyRow(5, 'sharp'),
      {
        ...emptyRow(6, 'smooth'),
        sigma: '0.5',
        fwhmMajor: '4.5',
        fwhmMinor: '4',
        pa: '30',
        unit: 'mJy/beam',
      },
    ];
    const body = jointRequest(moveRow(moveRow(rows, 0, 1), 0, 1), { preset: 'balanced', maxIterations: 200 });
    const parsed = createJointRunRequestSchema.parse(body);
    expect(parsed.images).toEqual([
      { imageId: 5, options: {} },
      {
        imageId: 6,
        options: { noiseSigma: 0.5, psf: { fwhmMajor: 4.5, fwhmMinor: 4, pa: 30 }, unit: 'mJy/beam' },
      },
    ]);
    expect(parsed.settings).toMatchObject({ preset: 'balanced', maxIterations: 200 });
    expect(moveRow(rows, 0, 1).map((r) => r.imageId)).toEqual([6, 5]);
    expect(moveRow(rows, 1, 1)).toBe(rows);
  });

  it('says which field of a row is wrong', () => {
    expect(rowIssues(emptyRow(1, 'a'))).toEqual({});
    expect(rowIssues({ ...emptyRow(1, 'a'), sigma: '-2' }).sigma).toMatch(/positive/);
    expect(rowIssues({ ...emptyRow(1, 'a'), fwhmMajor: '3' }).psf).toMatch(/both FWHMs/);
    expect(rowIssues({ ...emptyRow(1, 'a'), fwhmMajor: '3', fwhmMinor: '4' }).psf).toMatch(/must not exceed/);
    expect(rowIssues({ ...emptyRow(1, 'a'), pa: 'north' }).pa).toMatch(/degrees/);
  });
});

describe('gridLink', () => {
  it('carries a view to a 2× coarser image of the same field: centre through the WCS, zoom doubled', () => {
    // Fine pixel p ↔ coarse (p − ½)/2 + ½ when both grids share the tangent point and footprint
    // (samples/joint-pair.ts): fine 64² with CRPIX 32.5, coarse 32² with CRPIX 16.5.
    const link = gridLink(tanHeader(2, 32.5), tanHeader(4, 16.5))!;
    const view = link.view({ centreX: 40.5, centreY: 20.5, zoom: 3 })!;
    expect(view.centreX).toBeCloseTo((40.5 - 0.5) / 2 + 0.5, 6);
    expect(view.centreY).toBeCloseTo((20.5 - 0.5) / 2 + 0.5, 6);
    expect(view.zoom).toBeCloseTo(6, 9);
    expect(gridLink(tanHeader(2, 32.5), [{ keyword: 'NAXIS', value: 2 }])).toBeNull();
  });
});

describe('JointRunSetupPage', () => {
  const sharp = makeImage({ id: 21, name: 'LDF sharp', width: 64, height: 64 });
  const smooth = makeImage({ id: 22, name: 'LDF smooth', width: 32, height: 32, unit: 'mJy/beam' });

  async function mountSetup(post: Parameters<typeof mockRunsApi>[0][string]) {
    const api = mockRunsApi({
      'GET /api/projects/:id/images': { body: [sharp, smooth] },
      'POST /api/projects/:id/joint-runs': post,
    });
    const mounted = await mountPage(JointRunSetupPage, {
      path: '/projects/7/joint-runs/new?images=22,21',
      user: makeUser({ id: 1 }),
    });
    await settle();
    return { api, ...mounted };
  }

  it('lists the chosen images in order, lets the reference change, and sends the per-image options', async () => {
    const { api, wrapper, router } = await mountSetup({ status: 202, body: { id: 90, status: 'queued' } });
    expect(wrapper.get('[data-test="joint-row-1"]').text()).toContain('LDF smooth');
    expect(wrapper.get('[data-test="joint-row-1"]').text()).toContain('reference');
    await wrapper.get('button[aria-label="Move LDF sharp up"]').trigger('click');
    await settle();
    expect(wrapper.get('[data-test="joint-row-1"]').text()).toContain('LDF sharp');
    await wrapper.get('input[aria-label="σ of LDF smooth"]').setValue('0.5');
    await wrapper.get('form').trigger('submit');
    await settle();
    const [call] = api.callsTo('POST /api/projects/:id/joint-runs');
    expect(call!.params.id).toBe('7');
    const body = createJointRunRequestSchema.parse(call!.body);
    expect(body.images).toEqual([
      { imageId: 21, options: {} },
      { imageId: 22, options: { noiseSigma: 0.5 } },
    ]);
    expect(router.currentRoute.value.fullPath).toBe('/runs/90');
  });

  it('shows the server’s refusal as is and stays on the form', async () => {
    const message =
      'image 2 (LDF sharp) does not overlap the footprint of the reference image (image 1 (LDF smooth)): nothing to fit jointly';
    const { wrapper, router } = await mountSetup(apiError(422, 'unprocessable', message));
    await wrapper.get('form').trigger('submit');
    await settle();
    expect(wrapper.get('[data-test="joint-issue"]').text()).toBe(message);
    expect(router.currentRoute.value.path).toBe('/projects/7/joint-runs/new');
  });

  it('asks for a second image when only one is chosen, and does not send', async () => {
    mockRunsApi({ 'GET /api/projects/:id/images': { body: [sharp, smooth] } });
    const { wrapper } = await mountPage(JointRunSetupPage, {
      path: '/projects/7/joint-runs/new?images=21',
      user: makeUser({ id: 1 }),
    });
    await settle();
    expect(pageText()).toContain('Choose at least 2 images (1 chosen).');
    expect(wrapper.get('[data-test="joint-submit"]').attributes('disabled')).toBeDefined();
  });
});

const joint: JointRunInfo = {
  images: [1, 2].map((position) => ({
    position,
    imageId: 20 + position,
    name: position === 1 ? 'LDF sharp' : 'LDF smooth',
    width: position === 1 ? 64 : 32,
    height: position === 1 ? 64 : 32,
    options: {},
    fit: {
      scale:
        position === 1
          ? { value: 1, error: 0, fixed: true, mapValue: 1 }
          : { value: 1.06505, error: 0.00208, fixed: false, mapValue: 1.0649 },
      unit: 'Jy/beam',
      unitGain: position === 1 ? 1 : 1.44,
      likelihood: 'gaussian',
      sigma: position === 1 ? 1 : 0.5,
      sigmaSource: 'estimated',
      psfFwhmPx: { major: position === 1 ? 3 : 4.5, minor: position === 1 ? 3 : 4.5 },
      beamAreaPx: 10.2,
      pixelsUsed: position === 1 ? 4096 : 1024,
      pixelsOutside: 0,
      inputName: position === 1 ? 'LDF sharp' : 'LDF smooth',
      inputSha256: 'b'.repeat(64),
    },
  })),
  grid: { width: 64, height: 64, factor: 1, scaleArcsec: 2 },
  scalePriorWidth: 0.05,
  refinement: 'reference-image',
  warnings: [],
};

describe('JointRunPanel', () => {
  it('shows the scale factors with their errors and a plane of every image, fetched by position', async () => {
    const api = mockRunsApi({
      'GET /api/images/:id': (request) => ({
        body: makeImageDetail({
          id: Number(request.params.id),
          header: request.params.id === '21' ? tanHeader(2, 32.5) : tanHeader(4, 16.5),
        }),
      }),
    });
    const { wrapper } = await mountPage(JointRunPanel, { props: { runId: 42, joint, finished: true } });
    await settle();
    await settle();
    expect(wrapper.get('[data-test="scale-row-1"]').text()).toContain('1 (fixed)');
    // c = 1.06505 ± 0.00208 → two significant digits of the error, the value to the same place.
    expect(wrapper.get('[data-test="scale-row-2"]').text()).toContain('1.0651 ± 0.0021');
    expect(wrapper.get('[data-test="scale-caution"]').text()).toContain('somewhat optimistic');
    const planes = api.planeCalls.filter((call) => call.path === '/api/runs/42/components/residualNorm');
    expect(planes.map((call) => call.query.get('image')).sort()).toEqual(['1', '2']);
    expect(wrapper.find('[data-test="joint-viewer-2"]').text()).toContain('LDF smooth');
    expect(wrapper.get('[data-test="joint-fits-2"]').attributes('href')).toBe(
      '/api/runs/42/components/residualNorm?format=fits&image=2',
    );
  });
});

describe('image library', () => {
  it('offers a joint run once 2–4 images are ticked, in the order ticked', async () => {
    const first = makeImage({ id: 31, name: 'LDF first', createdAt: '2026-03-01T10:00:00.000Z' });
    const second = makeImage({ id: 32, name: 'LDF second', createdAt: '2026-03-02T10:00:00.000Z' });
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [first, second] } });
    const { wrapper } = await mountPage(ImageLibraryPage, {
      path: '/projects/7/images',
      user: makeUser({ id: 1 }),
    });
    await settle();
    const button = () => wrapper.get('[data-test="joint-run"]');
    expect(button().attributes('aria-disabled') ?? button().attributes('disabled')).toBeDefined();
    // Newest first in the table: tick "LDF first" (second row), then "LDF second".
    const boxes = wrapper.findAll('[data-test="image-table"] tbody .q-checkbox');
    await boxes[1]!.trigger('click');
    await boxes[0]!.trigger('click');
    await settle();
    expect(button().text()).toContain('Joint run (2)');
    expect(button().attributes('href')).toBe('/projects/7/joint-runs/new?images=31,32');
  });
});

describe('RunPage of a joint run', () => {
  it('says it is joint, lists every input in the provenance and shows the joint panel with the catalogue markers', async () => {
    const sources = [makeSource({ id: 1, x: 20.5, y: 30.25 })];
    mockRunsApi({
      'GET /api/runs/:id': { body: makeFinishedRun({ kind: 'joint', imageId: 21, joint }) },
      'GET /api/images/:id': (request) => ({
        body: makeImageDetail({
          id: Number(request.params.id),
          name: request.params.id === '21' ? 'LDF sharp' : 'LDF smooth',
          header: request.params.id === '21' ? tanHeader(2, 32.5) : tanHeader(4, 16.5),
        }),
      }),
      'GET /api/runs/:id/sources': {
        body: { sources, page: 1, pageSize: 25, total: 1, caution: 'Model-dependent catalogue.' },
      },
    });
    const { wrapper } = await mountPage(RunPage, { path: '/runs/42', user: makeUser({ id: 1 }) });
    await settle();
    await settle();
    expect(wrapper.get('[data-test="joint-summary"]').text()).toContain('jointly with 1 more image');
    expect(wrapper.get('[data-test="scale-row-2"]').text()).toContain('1.0651 ± 0.0021');
    expect(wrapper.get('[data-test="provenance"]').text()).toContain('Input 2');
    // injection studies re-run single-image fits: the server refuses them for a joint run, so no link to one
    expect(wrapper.find('[data-test="completeness-link"]').exists()).toBe(false);
    const panel = wrapper.getComponent(JointRunPanel);
    expect((panel.props('sources') ?? []).map((s) => s.id)).toEqual([1]);
  });
});

describe('RunSetupPage', () => {
  it('leads from a single run setup to a joint run with this image as the reference', async () => {
    mockRunsApi({
      'GET /api/images/:id': { body: makeImageDetail({ id: 11, projectId: 7 }) },
      'GET /api/images/:id/runs': { body: { runs: [] } },
    });
    const { wrapper } = await mountPage(RunSetupPage, {
      path: '/images/11/runs/new',
      user: makeUser({ id: 1 }),
    });
    await settle();
    expect(wrapper.get('[data-test="joint-setup-link"]').attributes('href')).toBe(
      '/projects/7/joint-runs/new?images=11',
    );
  });
});

describe('ComparisonPage with a joint run', () => {
  it('names the joint run as joint wherever runs are named', async () => {
    const base = makeComparison();
    const comparison = {
      ...base,
      runs: base.runs.map((run, i) => (i === 0 ? { ...run, kind: 'joint' as const } : run)),
    };
    mockComparisonApi({
      'GET /api/comparisons/:id': { body: comparison },
      'GET /api/comparisons/:id/cross-match': { body: makeCrossMatch() },
      'GET /api/runs/:id/sources': (request: MockRequest) => ({
        body: {
          sources: [makeSource({ id: Number(request.params.id) - 40 })],
          page: 1,
          pageSize: 1000,
          total: 1,
          caution: 'Model-dependent catalogue.',
        },
      }),
    } as never);
    await mountPage(ComparisonPage, { path: '/comparisons/5', user: makeUser({ id: 1 }) });
    await settle();
    const first = comparison.runs[0]!.id;
    const second = comparison.runs[1]!.id;
    expect(pageText()).toMatch(new RegExp(`Run ${first} \\([a-z-]+\\) \\(joint\\)`));
    expect(pageText()).not.toContain(`Run ${second} (deep-search) (joint)`);
  });
});
