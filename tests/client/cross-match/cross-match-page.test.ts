import { afterEach, describe, expect, it, vi } from 'vitest';
import { QSelect } from 'quasar';

import type { CrossMatchResultDto, ReferenceCatalogueDetail, ReferencePreview } from '@shared/cross-match';
import CrossMatchPage from '@/pages/CrossMatchPage.vue';
import CatalogueDropZone from '@/components/crossmatch/CatalogueDropZone.vue';
import ColumnMappingForm from '@/components/crossmatch/ColumnMappingForm.vue';
import SkyViewer from '@/components/viewer/SkyViewer.vue';
import { apiError } from '../support/api-mock';
import { makeUser } from '../support/fixtures';
import { mountPage, pageText, settle, unmountAll } from '../support/mount';
import { makeFinishedRun, makeImageDetail, makeRun, mockRunsApi } from '../runs/runs-support';

afterEach(() => {
  unmountAll();
  vi.unstubAllGlobals();
});

const user = makeUser({ id: 1 });
const image = makeImageDetail();
const catalogue: ReferenceCatalogueDetail = {
  id: 3,
  projectId: 7,
  name: 'AWS band 2',
  originalFileName: 'aws-band2.csv',
  format: 'csv',
  positions: 'sky',
  mapping: { ra: 'RAJ2000', dec: 'DEJ2000', flux: 'S_int', id: 'name' },
  columns: [],
  rowsRead: 5,
  rowsRejected: 1,
  entryCount: 4,
  bytes: 900,
  uploadedBy: { id: 1, displayName: 'Vega Lindqvist' },
  createdAt: '2026-03-05T10:00:00.000Z',
  rejected: [{ row: 5, line: 7, reason: "RA 'x' is not a number" }],
  sampleEntries: [],
};

const result: CrossMatchResultDto = {
  runId: 42,
  against: { kind: 'reference', id: 3, name: 'AWS band 2' },
  mode: 'sky',
  unit: 'arcsec',
  radius: 2.598,
  radiusSource: 'beam',
  ourFluxQuantity: 'fluxDensity',
  ourFluxUnit: 'Jy',
  counts: { ours: 3, theirs: 4, matched: 2, onlyOurs: 1, onlyTheirs: 2 },
  offsets: {
    count: 2,
    mean1: -0.75,
    mean1Err: 0.75,
    mean2: -0.5,
    mean2Err: 0.5,
    rms1: 1.0607,
    rms2: 0.7071,
    rmsSeparation: 1.2748,
  },
  fluxRatio: { count: 2, median: 1.0101, medianErr: 0.1877, robustScatter: 0.1498 },
  chanceMatchesExpected: 0.021,
  pairs: [
    {
      ourId: 1,
      theirId: 'AWS-A',
      separation: 1,
      offset1: 0,
      offset2: -1,
      fluxRatio: 0.909,
      ourFlux: 0.01,
      theirFlux: 0.011,
      ourX: 32,
      ourY: 24,
      ourRa: 277.5,
      ourDec: 36.2,
      theirX: 32,
      theirY: 24.67,
      theirRa: 277.5,
      theirDec: 36.2003,
    },
  ],
  onlyOurs: [{ id: '3', x: 10, y: 10, ra: 277.51, dec: 36.19, flux: 0.005 }],
  onlyTheirs: [{ id: 'AWS-C', x: 50, y: 40, ra: 277.49, dec: 36.21, flux: 0.03 }],
  cautions: ['A pair within the radius is a positional coincidence, not proof of the same object.'],
};

const otherRun = { ...makeRun({ id: 43, status: 'succeeded', sourceCount: 5 }) };

function mockPage(role: 'owner' | 'editor' | 'viewer', extra: Parameters<typeof mockRunsApi>[0] = {}) {
  return mockRunsApi(
    {
      'GET /api/runs/:id': { body: makeFinishedRun() },
      'GET /api/images/:id': { body: image },
      'GET /api/images/:id/runs': { body: { runs: [makeFinishedRun(), otherRun] } },
      'GET /api/projects/:id/reference-catalogues': { body: { referenceCatalogues: [catalogue] } },
      'POST /api/runs/:id/cross-match': { body: result },
      ...extra,
    },
    role,
  );
}

describe('CrossMatchPage', () => {
  it('matches against the first reference with the default radius from the beam and shows the summary', async () => {
    const api = mockPage('viewer');
    const { wrapper } = await mountPage(CrossMatchPage, { path: '/runs/42/cross-match', user });
    await settle();
    // √(6″ · 4.5″)/2 = 2.60″ for the fixture's beam.
    expect(wrapper.get('[data-test="match-setup"]').text()).toContain(
      'Empty: 2.60 arcsec, half the restoring beam FWHM.',
    );
    expect(wrapper.find('[data-test="add-reference"]').exists()).toBe(false);
    expect(wrapper.get('[data-test="no-result"]').text()).toContain('press Match');

    await wrapper.get('[data-test="run-match"]').trigger('click');
    await settle();
    expect(api.callsTo('POST /api/runs/:id/cross-match')[0]!.body).toEqual({
      against: { kind: 'reference', id: 3 },
    });
    expect(wrapper.get('[data-test="figure-matched"]').text()).toBe('2');
    expect(wrapper.get('[data-test="figure-only-ours"]').text()).toBe('1');
    expect(wrapper.get('[data-test="figure-only-theirs"]').text()).toBe('2');
    expect(wrapper.get('[data-test="figure-offset1"]').text()).toBe('−0.75 ± 0.75″');
    expect(wrapper.get('[data-test="figure-flux-ratio"]').text()).toBe('1.010 ± 0.188');
    expect(wrapper.get('[data-test="match-cautions"]').text()).toContain('positional coincidence');
    const links = wrapper
      .get('[data-test="match-exports"]')
      .findAll('a')
      .map((a) => a.attributes('href'));
    expect(links).toEqual([
      '/api/runs/42/cross-match?kind=reference&against=3&format=csv',
      '/api/runs/42/cross-match?kind=reference&against=3&format=votable',
      '/api/runs/42/cross-match?kind=reference&against=3&format=fits',
    ]);
    // Both catalogues on the image: ours solid, theirs dashed.
    const sources = wrapper.getComponent(SkyViewer).props('sources') as { id: string; kind?: string }[];
    expect(sources.map((s) => [s.id, s.kind ?? 'primary'])).toEqual([
      ['ours:1', 'primary'],
      ['ours:3', 'primary'],
      ['theirs:AWS-A', 'secondary'],
      ['theirs:AWS-C', 'secondary'],
    ]);
    expect(wrapper.get('[data-test="pairs-table"]').text()).toContain('AWS-A');
    api.expectNoUnexpectedCalls();
  });

  it('sends a typed radius, refuses a bad one, and shows the server refusal', async () => {
    const api = mockPage('viewer', {
      'POST /api/runs/:id/cross-match': apiError(422, 'unprocessable', 'The image has no restoring beam.'),
    });
    const { wrapper } = await mountPage(CrossMatchPage, { path: '/runs/42/cross-match', user });
    await settle();
    await wrapper.get('[data-test="radius"]').setValue('-2');
    expect(wrapper.get('[data-test="match-setup"]').text()).toContain(
      'The radius must be a positive number.',
    );
    expect(wrapper.get('[data-test="run-match"]').attributes('disabled')).toBeDefined();
    await wrapper.get('[data-test="radius"]').setValue('1,5');
    await wrapper.get('[data-test="run-match"]').trigger('click');
    await settle();
    expect(api.callsTo('POST /api/runs/:id/cross-match')[0]!.body).toEqual({
      against: { kind: 'reference', id: 3 },
      radiusArcsec: 1.5,
    });
    expect(wrapper.get('[data-test="match-error"]').text()).toBe('The image has no restoring beam.');
  });

  it('matches against another run of the same image', async () => {
    const api = mockPage('viewer');
    const { wrapper } = await mountPage(CrossMatchPage, { path: '/runs/42/cross-match', user });
    await settle();
    await wrapper.get('[data-test="target-kind"]').findAll('button')[1]!.trigger('click');
    await settle();
    expect(wrapper.get('[data-test="match-setup"]').text()).toContain('Run 43 (5 sources)');
    await wrapper.get('[data-test="run-match"]').trigger('click');
    await settle();
    expect(api.callsTo('POST /api/runs/:id/cross-match')[0]!.body).toEqual({
      against: { kind: 'run', id: 43 },
    });
  });

  it('lets an editor add a catalogue: preview, choose the columns when unsure, see rejected rows, store', async () => {
    const forms: FormData[] = [];
    const unsure: ReferencePreview = {
      fileName: 'lyra.csv',
      format: 'csv',
      fileBytes: 64,
      columns: [
        { name: 'label', unit: null, ucd: null },
        { name: 'alpha_deg', unit: null, ucd: null },
        { name: 'delta_deg', unit: null, ucd: null },
      ],
      sampleRows: [['q1', '277.5', '36.2']],
      guessedMapping: {},
      mapping: null,
      positions: null,
      problem: 'No position columns found: looked for RA/Dec.',
      notes: [],
      unsure: true,
      rowsRead: 2,
      rowsRejected: 0,
      rejected: [],
      sampleEntries: [],
    };
    const chosen: ReferencePreview = {
      ...unsure,
      mapping: { ra: 'alpha_deg', dec: 'delta_deg', id: 'label' },
      positions: 'sky',
      problem: null,
      notes: ['No flux column was recognised, so flux ratios cannot be computed.'],
      rowsRejected: 1,
      rejected: [{ row: 2, line: 3, reason: "RA 'abc' is not a number" }],
    };
    const stored = { ...catalogue, id: 9, name: 'Lyra list' };
    const api = mockPage('editor', {
      'POST /api/projects/:id/reference-catalogues/preview': () => ({
        body: forms.length > 1 ? chosen : unsure,
      }),
      'POST /api/projects/:id/reference-catalogues': { status: 201, body: stored },
    });
    const inner = globalThis.fetch;
    vi.stubGlobal('fetch', (input: string, init: RequestInit = {}) => {
      if (init.body instanceof FormData) forms.push(init.body);
      return inner(input, init);
    });
    const { wrapper } = await mountPage(CrossMatchPage, { path: '/runs/42/cross-match', user });
    await settle();
    await wrapper.get('[data-test="add-reference"] .q-item').trigger('click');
    await settle();
    wrapper
      .getComponent(CatalogueDropZone)
      .vm.$emit('file', new File(['label,alpha_deg,delta_deg\nq1,277.5,36.2\nq2,abc,36.3\n'], 'lyra.csv'));
    await settle();
    expect(wrapper.get('[data-test="preview-problem"]').text()).toContain('No position columns found');
    expect(wrapper.get('[data-test="store-catalogue"]').attributes('disabled')).toBeDefined();
    expect(wrapper.get('[data-test="sample-rows"]').text()).toContain('alpha_deg');

    // The guess was unsure: the form is open; choose RA, Dec and the id.
    const selects = wrapper.getComponent(ColumnMappingForm).findAllComponents(QSelect);
    selects[0]!.vm.$emit('update:modelValue', 'alpha_deg');
    await settle();
    wrapper
      .getComponent(ColumnMappingForm)
      .findAllComponents(QSelect)[1]!
      .vm.$emit('update:modelValue', 'delta_deg');
    await settle();
    wrapper
      .getComponent(ColumnMappingForm)
      .findAllComponents(QSelect)[3]!
      .vm.$emit('update:modelValue', 'label');
    await settle();
    await wrapper.get('[data-test="check-mapping"]').trigger('click');
    await settle();
    expect(JSON.parse(String(forms[1]!.get('mapping')))).toEqual({
      ra: 'alpha_deg',
      dec: 'delta_deg',
      id: 'label',
    });
    expect(forms[1]!.get('positions')).toBe('sky');
    expect((forms[1]!.get('file') as File).name).toBe('lyra.csv');
    expect(wrapper.get('[data-test="preview-notes"]').text()).toContain('No flux column');
    expect(wrapper.get('[data-test="rejected-rows"]').text()).toContain('Rows left out (1)');

    await wrapper.get('[data-test="catalogue-name"]').setValue('Lyra list');
    await wrapper.get('[data-test="store-catalogue"]').trigger('click');
    await settle();
    const upload = forms[2]!;
    expect(upload.get('name')).toBe('Lyra list');
    expect(JSON.parse(String(upload.get('mapping')))).toEqual({
      ra: 'alpha_deg',
      dec: 'delta_deg',
      id: 'label',
    });
    expect(api.callsTo('POST /api/projects/:id/reference-catalogues')[0]!.headers['x-csrf-token']).toBe(
      'test-csrf-token',
    );
    expect(wrapper.get('[data-test="match-setup"]').text()).toContain('Lyra list');
    expect(pageText()).not.toContain('Reading the file…');
    api.expectNoUnexpectedCalls();
  });

  it('says so when the run has not succeeded', async () => {
    mockRunsApi({
      'GET /api/runs/:id': { body: makeRun() },
      'GET /api/images/:id': { body: image },
      'GET /api/images/:id/runs': { body: { runs: [] } },
      'GET /api/projects/:id/reference-catalogues': { body: { referenceCatalogues: [] } },
    });
    const { wrapper } = await mountPage(CrossMatchPage, { path: '/runs/42/cross-match', user });
    await settle();
    expect(wrapper.get('[data-test="not-finished"]').text()).toContain('has not succeeded');
  });
});
