/**
 * Test doubles for the comparison pages: an invented comparison of two runs of the fictional Lyra Deep Field
 * (Aster Wide Survey), its cross-match, and the JSON API mock with binary routes in front of it for the runs'
 * component planes and the comparison's difference (undeclared routes still fail).
 */
import { vi } from 'vitest';

import type { ComparisonDetail, RunCrossMatch } from '@shared/comparisons';
import { mockApi, type MockRoutes } from '../support/api-mock';
import { makeProjectDetail } from '../support/fixtures';
import { makeImageDetail } from '../runs/runs-support';

export const PLANE_WIDTH = 32;
export const PLANE_HEIGHT = 24;

export function makeComparison(overrides: Partial<ComparisonDetail> = {}): ComparisonDetail {
  const run = (id: number, settings: Record<string, unknown>) => ({
    id,
    imageId: 11,
    projectId: 7,
    createdBy: 1,
    status: 'succeeded' as const,
    progress: null,
    errorMessage: null,
    attempts: 1,
    cancelRequested: false,
    sourceCount: 4,
    timings: {
      queuedAt: '2026-03-04T09:00:00.000Z',
      startedAt: '2026-03-04T09:00:01.000Z',
      finishedAt: '2026-03-04T09:01:31.000Z',
      phasesMs: { total: 90000 },
    },
    settings,
    settingsDigest: String(id).repeat(64).slice(0, 64),
  });
  return {
    id: 5,
    projectId: 7,
    imageId: 11,
    imageName: 'ldf-l-band',
    name: 'Threshold 5 against 8',
    component: 'diffuse',
    runIds: [42, 43],
    runCount: 2,
    createdBy: 1,
    createdByName: 'Ada Observer',
    createdAt: '2026-03-04T10:00:00.000Z',
    updatedAt: '2026-03-04T10:00:00.000Z',
    runs: [
      run(42, { preset: 'balanced', threshold: 5, noiseSigma: null }),
      run(43, { preset: 'deep-search', threshold: 8, noiseSigma: 0.0001 }),
    ],
    settingsDifference: [
      {
        key: 'preset',
        label: 'Preset',
        unit: null,
        values: ['balanced', 'deep-search'],
        display: ['balanced', 'deep-search'],
      },
      {
        key: 'noiseSigma',
        label: 'Noise σ',
        unit: 'image units',
        values: [null, 0.0001],
        display: ['estimated from the data', '0.0001'],
      },
      { key: 'threshold', label: 'Detection threshold', unit: 'SNR', values: [5, 8], display: ['5', '8'] },
    ],
    note: null,
    ...overrides,
  };
}

const source = (id: number, flux: number, fluxErr: number, x = 10 + id, y = 8) => ({
  id,
  x,
  y,
  ra: 150 + id / 3600,
  dec: 2,
  flux,
  fluxErr,
  snr: flux / fluxErr,
});

export function makeCrossMatch(overrides: Partial<RunCrossMatch> = {}): RunCrossMatch {
  const pairs = [
    [1, 0.02, 0.001, 1, 0.021, 0.001],
    [2, 0.012, 0.001, 2, 0.0118, 0.001],
    [3, 0.006, 0.0008, 3, 0.0064, 0.0009],
  ].map(([ia, fa, ea, ib, fb, eb]) => ({
    a: source(ia!, fa!, ea!),
    b: source(ib!, fb!, eb!),
    separation: 0.4,
    offset1: 0.1,
    offset2: -0.2,
    fluxRatio: fa! / fb!,
  }));
  return {
    a: 42,
    b: 43,
    mode: 'sky',
    unit: 'arcsec',
    radius: 2.25,
    radiusSource: 'beam',
    fluxKind: 'fluxDensity',
    fluxUnit: 'Jy',
    counts: { a: 4, b: 3, matched: 3, onlyA: 1, onlyB: 0 },
    pairs,
    onlyA: [source(4, 0.003, 0.0006, 20, 15)],
    onlyB: [],
    offsets: {
      count: 3,
      mean1: 0.1,
      mean1Err: 0.05,
      mean2: -0.2,
      mean2Err: 0.04,
      rms1: 0.12,
      rms2: 0.22,
      rmsSeparation: 0.4,
    },
    fluxRatio: { count: 3, median: 0.9524, medianErr: 0.0311, robustScatter: 0.0456 },
    caution: 'Both catalogues come from fits of the same data.',
    ...overrides,
  };
}

export interface PlaneCall {
  path: string;
  query: URLSearchParams;
}

/** Value of pixel k in the plane of run `runId`: runId + k / 1000 (so two runs' planes differ). */
export const planeValue = (runId: number, k: number) => runId + k / 1000;

function planeResponse(values: (k: number) => number): Response {
  const bytes = new Uint8Array(PLANE_WIDTH * PLANE_HEIGHT * 4);
  const view = new DataView(bytes.buffer);
  for (let k = 0; k < PLANE_WIDTH * PLANE_HEIGHT; k++) view.setFloat32(k * 4, values(k), true);
  return new Response(new Blob([bytes]), {
    headers: {
      'content-type': 'application/octet-stream',
      'X-Plane-Width': String(PLANE_WIDTH),
      'X-Plane-Height': String(PLANE_HEIGHT),
      'X-Plane-Factor': '1',
      'X-Source-Width': String(PLANE_WIDTH),
      'X-Source-Height': String(PLANE_HEIGHT),
    },
  });
}

/** `routes` plus the image and project routes, and binary answers for component planes and differences. */
export function mockComparisonApi(routes: MockRoutes, role: 'owner' | 'editor' | 'viewer' = 'owner') {
  const api = mockApi({
    'GET /api/projects/:id': { body: makeProjectDetail({ id: 7, myRole: role }) },
    'GET /api/images/:id': { body: makeImageDetail({ id: 11, width: PLANE_WIDTH, height: PLANE_HEIGHT }) },
    ...routes,
  });
  const json = globalThis.fetch;
  const planeCalls: PlaneCall[] = [];
  vi.stubGlobal('fetch', async (input: string | URL | Request, init: RequestInit = {}) => {
    const url = new URL(String(input), 'http://skysieve.test');
    const get = (init.method ?? 'GET') === 'GET';
    const component = /^\/api\/runs\/(\d+)\/components\/\w+$/.exec(url.pathname);
    if (get && component) {
      planeCalls.push({ path: url.pathname, query: url.searchParams });
      return planeResponse((k) => planeValue(Number(component[1]), k));
    }
    if (get && /^\/api\/comparisons\/\d+\/difference$/.test(url.pathname)) {
      planeCalls.push({ path: url.pathname, query: url.searchParams });
      const a = Number(url.searchParams.get('a'));
      const b = Number(url.searchParams.get('b'));
      return planeResponse((k) => planeValue(a, k) - planeValue(b, k) + (k % 7) / 100 - 0.03);
    }
    return json(input, init);
  });
  return { ...api, planeCalls };
}
