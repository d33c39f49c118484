/**
 * Test doubles for the image library: the project route every library page asks (for the caller's role), a
 * binary pixel-view route in front of the JSON API mock (undeclared routes still fail), and an
 * XMLHttpRequest the test drives by hand (progress events, the server's answer).
 */
import { vi } from 'vitest';

import { encodePixelView, type ImageSummary, type PixelView } from '@shared/images';
import type { ProjectRole } from '@shared/projects';
import { mockApi, type MockRoutes } from '../support/api-mock';
import { makeProjectDetail } from '../support/fixtures';

// Invented images of the fictional Lyra Deep Field (Aster Wide Survey).
export function makeImage(overrides: Partial<ImageSummary> = {}): ImageSummary {
  return {
    id: 11,
    projectId: 7,
    name: 'LDF 1.4 GHz mosaic',
    originalFileName: 'ldf-l-band.fits',
    format: 'fits',
    gzipped: false,
    width: 2048,
    height: 1024,
    plane: null,
    unit: 'Jy/beam',
    fileBytes: 8 * 1024 * 1024,
    contentSha256: 'a'.repeat(64),
    statistics: {
      min: -0.001,
      max: 0.2,
      mean: 0.0001,
      median: 0,
      standardDeviation: 0.002,
      validPixels: 2097152,
      blankPixels: 0,
    },
    noise: { sigma: 0.000123, samples: 2000000, sigmaUncertainty: 0.0000001 },
    wcs: {
      celestial: true,
      projection: 'SIN',
      frame: 'ICRS',
      equinox: null,
      ctype: ['RA---SIN', 'DEC--SIN'],
      referencePixel: [1024.5, 512.5],
      referenceValue: [277.5, 36.2],
      pixelScaleArcsec: [-1.5, 1.5],
      cdelt1Sign: -1,
      centre: { lon: 277.5, lat: 36.2 },
    },
    beam: { majorArcsec: 6, minorArcsec: 4.5, paDeg: 30, areaPixels: 13.6 },
    warnings: [],
    uploadedBy: { id: 1, displayName: 'Vega Lindqvist' },
    createdAt: '2026-03-02T10:00:00.000Z',
    updatedAt: '2026-03-02T10:00:00.000Z',
    ...overrides,
  };
}

export interface PixelAnswer {
  status?: number;
  /** A view to encode with the shared encoder, or an error body sent as JSON. */
  view?: PixelView;
  error?: { code: string; message: string };
  etag?: string;
}

export type PixelHandler = (call: PixelCall) => PixelAnswer;

export interface PixelCall {
  imageId: string;
  query: URLSearchParams;
  headers: Record<string, string>;
}

/**
 * The JSON mock of `routes` plus `GET /api/projects/:id` answering the caller's `role`, and, when `pixels` is
 * given, `GET /api/images/:id/pixels` answering binary bytes.
 */
export function mockLibraryApi(
  routes: MockRoutes,
  options: { role?: ProjectRole | null; pixels?: PixelHandler } = {},
) {
  const role = options.role === undefined ? 'owner' : options.role;
  const api = mockApi({ 'GET /api/projects/:id': { body: makeProjectDetail({ myRole: role }) }, ...routes });
  const json = globalThis.fetch;
  const pixelCalls: PixelCall[] = [];
  const pixels = options.pixels;
  if (pixels) {
    vi.stubGlobal('fetch', async (input: string | URL | Request, init: RequestInit = {}) => {
      const url = new URL(String(input), 'http://skysieve.test');
      const match = /^\/api\/images\/(\d+)\/pixels$/.exec(url.pathname);
      if (!match || (init.method ?? 'GET') !== 'GET') return json(input, init);
      const call = {
        imageId: match[1]!,
        query: url.searchParams,
        headers: { ...((init.headers ?? {}) as Record<string, string>) },
      };
      pixelCalls.push(call);
      const answer = pixels(call);
      const status = answer.status ?? 200;
      if (answer.error)
        return new Response(JSON.stringify({ error: answer.error }), {
          status,
          headers: { 'content-type': 'application/json' },
        });
      const headers: Record<string, string> = { 'content-type': 'application/octet-stream' };
      if (answer.etag) headers.etag = answer.etag;
      const body = status === 304 || !answer.view ? null : new Blob([encodePixelView(answer.view).slice()]);
      return new Response(body, { status, headers });
    });
  }
  return { ...api, pixelCalls };
}

/** A hand-driven XMLHttpRequest: the test fires progress and the answer. */
export class FakeXhr {
  static instances: FakeXhr[] = [];

  method = '';
  url = '';
  withCredentials = false;
  headers: Record<string, string> = {};
  body: FormData | null = null;
  status = 0;
  statusText = '';
  responseText = '';
  aborted = false;
  upload: { onprogress: ((event: ProgressEvent) => void) | null } = { onprogress: null };
  onload: (() => void) | null = null;
  onerror: (() => void) | null = null;
  onabort: (() => void) | null = null;

  constructor() {
    FakeXhr.instances.push(this);
  }

  open(method: string, url: string): void {
    this.method = method;
    this.url = url;
  }

  setRequestHeader(name: string, value: string): void {
    this.headers[name.toLowerCase()] = value;
  }

  send(body: FormData): void {
    this.body = body;
  }

  abort(): void {
    this.aborted = true;
    this.onabort?.();
  }

  /** The browser reports `loaded` of `total` bytes sent. */
  progress(loaded: number, total: number): void {
    this.upload.onprogress?.({ loaded, total, lengthComputable: true } as ProgressEvent);
  }

  respond(status: number, body: unknown): void {
    this.status = status;
    this.responseText = body === undefined ? '' : JSON.stringify(body);
    this.onload?.();
  }

  /** The connection broke before an answer. */
  fail(): void {
    this.onerror?.();
  }

  static install(): void {
    FakeXhr.instances = [];
    vi.stubGlobal('XMLHttpRequest', FakeXhr);
  }
}
