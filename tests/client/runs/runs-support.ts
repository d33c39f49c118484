/**
 * Test doubles for the run pages: invented runs of the fictional Lyra Deep Field (Aster Wide Survey), the JSON
 * API mock with binary routes for component planes and image pixels in front of it (undeclared routes still
 * fail), and an EventSource the test drives by hand.
 */
import { vi } from 'vitest';

import type { CatalogueSource } from '@shared/catalogue';
import { encodePixelView, type ImageDetail } from '@shared/images';
import type { RunDetail } from '@shared/runs';
import { mockApi, type MockRoutes } from '../support/api-mock';
import { makeProjectDetail } from '../support/fixtures';
import { makeImage } from '../images/library-support';

export function makeImageDetail(overrides: Partial<ImageDetail> = {}): ImageDetail {
  return {
    ...makeImage({ width: 64, height: 48 }),
    header: [
      { keyword: 'SIMPLE', value: true },
      { keyword: 'NAXIS1', value: 64 },
      { keyword: 'NAXIS2', value: 48 },
    ],
    originalAxes: [64, 48],
    ...overrides,
  };
}

export function makeRun(overrides: Partial<RunDetail> = {}): RunDetail {
  return {
    id: 42,
    imageId: 11,
    projectId: 7,
    createdBy: 1,
    status: 'running',
    progress: null,
    errorMessage: null,
    attempts: 1,
    cancelRequested: false,
    sourceCount: null,
    timings: { queuedAt: '2026-03-04T09:00:00.000Z', startedAt: null, finishedAt: null, phasesMs: null },
    requestedSettings: { preset: 'balanced' },
    settings: { preset: 'balanced', likelihood: 'gaussian', psf: null, threshold: 5 },
    settingsDigest: 'd'.repeat(64),
    provenance: null,
    diagnostics: null,
    components: [],
    resultBytes: 0,
    ...overrides,
  };
}

export function makeFinishedRun(overrides: Partial<RunDetail> = {}): RunDetail {
  const names = ['diffuse', 'compact', 'model', 'residual', 'residualNorm'] as const;
  return makeRun({
    status: 'succeeded',
    sourceCount: 2,
    timings: {
      queuedAt: '2026-03-04T09:00:00.000Z',
      startedAt: '2026-03-04T09:00:01.000Z',
      finishedAt: '2026-03-04T09:01:31.000Z',
      phasesMs: { total: 90000 },
    },
    provenance: {
      softwareName: 'Skysieve',
      softwareVersion: '0.1.0',
      settingsDigest: 'd'.repeat(64),
      inputSha256: 'a'.repeat(64),
      inputName: 'ldf-l-band.fits',
      width: 64,
      height: 48,
    },
    components: names.map((name) => ({ name, width: 64, height: 48 })),
    ...overrides,
  });
}

export function makeSource(overrides: Partial<CatalogueSource> = {}): CatalogueSource {
  return {
    id: 1,
    x: 20.5,
    y: 30.25,
    xErr: 0.1,
    yErr: 0.1,
    ra: null,
    dec: null,
    raErrArcsec: null,
    decErrArcsec: null,
    flux: 0.012,
    fluxErr: 0.001,
    fluxDensity: null,
    fluxDensityErr: null,
    snr: 12,
    significance: null,
    flags: [],
    ...overrides,
  };
}

export interface PlaneCall {
  path: string;
  query: URLSearchParams;
}

/** `routes` (plus the project route for the caller's role) and binary answers for planes of 64 × 48 pixels. */
export function mockRunsApi(routes: MockRoutes, role: 'owner' | 'editor' | 'viewer' = 'owner') {
  const api = mockApi({ 'GET /api/projects/:id': { body: makeProjectDetail({ myRole: role }) }, ...routes });
  const json = globalThis.fetch;
  const planeCalls: PlaneCall[] = [];
  const width = 64;
  const height = 48;
  const data = Float32Array.from({ length: width * height }, (_, k) => k / 100);
  vi.stubGlobal('fetch', async (input: string | URL | Request, init: RequestInit = {}) => {
    const url = new URL(String(input), 'http://skysieve.test');
    if ((init.method ?? 'GET') === 'GET' && /^\/api\/images\/\d+\/pixels$/.test(url.pathname)) {
      planeCalls.push({ path: url.pathname, query: url.searchParams });
      const view = {
        width,
        height,
        factor: 1,
        sourceWidth: width,
        sourceHeight: height,
        blankPixels: 0,
        data,
      };
      return new Response(new Blob([encodePixelView(view).slice()]), {
        headers: { 'content-type': 'application/octet-stream' },
      });
    }
    if ((init.method ?? 'GET') === 'GET' && /^\/api\/runs\/\d+\/components\/\w+$/.test(url.pathname)) {
      planeCalls.push({ path: url.pathname, query: url.searchParams });
      // Little-endian float32, as the server sends it (DataView with littleEndian = true).
      const bytes = new Uint8Array(width * height * 4);
      const view = new DataView(bytes.buffer);
      data.forEach((value, k) => view.setFloat32(k * 4, value * 2, true));
      return new Response(new Blob([bytes]), {
        headers: {
          'content-type': 'application/octet-stream',
          'X-Plane-Width': String(width),
          'X-Plane-Height': String(height),
          'X-Plane-Factor': '1',
          'X-Source-Width': String(width),
          'X-Source-Height': String(height),
        },
      });
    }
    return json(input, init);
  });
  return { ...api, planeCalls };
}

/** An EventSource the test drives: `emit('run', payload)` delivers one Server-Sent Event. */
export class FakeEventSource {
  static instances: FakeEventSource[] = [];

  readonly url: string;
  readonly withCredentials: boolean;
  closed = false;
  onerror: ((event: Event) => void) | null = null;
  private listeners = new Map<string, ((event: MessageEvent) => void)[]>();

  constructor(url: string, init: { withCredentials?: boolean } = {}) {
    this.url = url;
    this.withCredentials = init.withCredentials ?? false;
    FakeEventSource.instances.push(this);
  }

  addEventListener(type: string, listener: (event: MessageEvent) => void): void {
    this.listeners.set(type, [...(this.listeners.get(type) ?? []), listener]);
  }

  emit(type: string, payload: unknown): void {
    if (this.closed) throw new Error(`Event ${type} sent to a closed EventSource`);
    const event = new MessageEvent(type, { data: JSON.stringify(payload) });
    for (const listener of this.listeners.get(type) ?? []) listener(event);
  }

  close(): void {
    this.closed = true;
  }
}
