/**
 * Separation runs: starting one, following it, and reading its results (catalogue pages, component planes,
 * export links). JSON calls go through the app's one API client (`api.request`, answers parsed with the shared
 * schemas); the binary component planes are read here from GET /api/runs/:id/components/:name?format=float32
 * (little-endian float32, size in the X-Plane-* headers).
 */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import { errorBodySchema } from '@shared/errors';
import { imageDetailSchema, type ImageDetail, type PixelView } from '@shared/images';
import {
  runCreatedSchema,
  runDetailSchema,
  runListSchema,
  sourcePageSchema,
  type ComponentName,
  type RunDetail,
  type RunSummary,
  type SourcePage,
  type SourceSort,
} from '@shared/runs';
import type { SeparationSettingsInput } from '@shared/separation-settings';
import { api, ApiError } from '@/boot/api';
import { notifyError } from '@/boot/notify';

const id = (value: number) => encodeURIComponent(String(value));

/** Catalogue filters and paging, as sent to GET /api/runs/:id/sources. */
export interface SourceQuery {
  page: number;
  pageSize: number;
  sort: SourceSort;
  minSnr?: number;
  maxSnr?: number;
  minFlux?: number;
  maxFlux?: number;
  flags?: string;
}

export type ComponentPlane = Pick<
  PixelView,
  'width' | 'height' | 'factor' | 'sourceWidth' | 'sourceHeight' | 'data'
>;

export const runApi = {
  image: (imageId: number): Promise<ImageDetail> =>
    api.request('GET', `/api/images/${id(imageId)}`, { schema: imageDetailSchema }),
  create: (imageId: number, settings: SeparationSettingsInput) =>
    api.request('POST', `/api/images/${id(imageId)}/runs`, { body: { settings }, schema: runCreatedSchema }),
  get: (runId: number): Promise<RunDetail> =>
    api.request('GET', `/api/runs/${id(runId)}`, { schema: runDetailSchema }),
  listForImage: (imageId: number): Promise<RunSummary[]> =>
    api
      .request('GET', `/api/images/${id(imageId)}/runs`, { schema: runListSchema })
      .then((list) => list.runs),
  cancel: (runId: number) => api.request<void>('POST', `/api/runs/${id(runId)}/cancel`),
  sources: (runId: number, query: SourceQuery): Promise<SourcePage> =>
    api.request('GET', `/api/runs/${id(runId)}/sources`, { query: { ...query }, schema: sourcePageSchema }),
  eventsUrl: (runId: number) => `/api/runs/${id(runId)}/events`,
  /** A download link of the catalogue (the current filters and sort apply; paging does not). */
  sourcesDownloadUrl: (
    runId: number,
    format: 'csv' | 'votable' | 'fits',
    query: Partial<SourceQuery> = {},
  ) => {
    const search = new URLSearchParams({ format });
    for (const [key, value] of Object.entries(query))
      if (value !== undefined && key !== 'page' && key !== 'pageSize') search.set(key, String(value));
    return `/api/runs/${id(runId)}/sources?${search.toString()}`;
  },
  componentFitsUrl: (runId: number, name: ComponentName) =>
    `/api/runs/${id(runId)}/components/${encodeURIComponent(name)}?format=fits`,
  /** Block-averaged float32 view of one component plane whose longest side is at most maxSize. */
  component(runId: number, name: ComponentName, maxSize = 1024): Promise<ComponentPlane> {
    const path = `/api/runs/${id(runId)}/components/${encodeURIComponent(name)}?format=float32&maxSize=${maxSize}`;
    return fetchPlane(path, `The ${name} plane`);
  },
};

/**
 * GET of a little-endian float32 plane view (size in the X-Plane-* headers), e.g. a run's component or a
 * comparison's difference; `what` names it in the message when the bytes cannot be read.
 */
export async function fetchPlane(path: string, what: string): Promise<ComponentPlane> {
  let response: Response;
  try {
    response = await globalThis.fetch(path, {
      method: 'GET',
      headers: { accept: 'application/octet-stream' },
      credentials: 'same-origin',
    });
  } catch {
    throw new ApiError(
      0,
      'network',
      'The Skysieve server cannot be reached. Check your connection and try again.',
    );
  }
  if (!response.ok) {
    const body = errorBodySchema.safeParse(await response.json().catch(() => undefined));
    if (body.success) throw new ApiError(response.status, body.data.error.code, body.data.error.message);
    throw new ApiError(response.status, 'unexpected_response', `The server answered ${response.status}.`);
  }
  const header = (name: string) => Number(response.headers.get(name));
  const width = header('X-Plane-Width');
  const height = header('X-Plane-Height');
  const bytes = new Uint8Array(await response.arrayBuffer());
  if (!(width > 0 && height > 0) || bytes.byteLength !== width * height * 4)
    throw new ApiError(response.status, 'unexpected_response', `${what} could not be read.`);
  const data = new Float32Array(width * height);
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  for (let i = 0; i < data.length; i++) data[i] = view.getFloat32(i * 4, true);
  return {
    width,
    height,
    factor: header('X-Plane-Factor') || 1,
    sourceWidth: header('X-Source-Width') || width,
    sourceHeight: header('X-Source-Height') || height,
    data,
  };
}

/** Seconds to take one 2-D real FFT forward + inverse pair on a 2048² grid on the reference machine
 * (../shared/STACK.md FFT table, pffft WASM, 2 threads: 52 ms). */
const FFT_PAIR_SECONDS_2048 = 0.052;

/** FFT pairs per objective evaluation, all costs included: 4.2 when the bench measured 5.2–6.3 pairs per
 *  evaluation, scaled by the 3.5–3.7 it measures since the fused float32 transforms (npm run bench, 1024² and
 *  2048²). */
const PAIRS_PER_EVALUATION = 2.9;

/** Full-grid evaluations of a default fit on the bench skies (npm run bench: 91–171 from 256² to 2048², the
 *  coarse start counted at a quarter). */
const TYPICAL_EVALUATIONS = 180;

/**
 * A rough run-time estimate in seconds, marked as such wherever it is shown. Rule (ours, from the bench, not
 * measured per image): the fit runs on a grid padded by about a quarter on each side, an FFT pair there scales
 * as N log N from the 2048² time above, and an evaluation costs PAIRS_PER_EVALUATION pairs. A fit stops when
 * its prediction settles, typically after TYPICAL_EVALUATIONS evaluations (more with more seeding rounds), or
 * earlier when the iteration budget (a third of maxIterations per early stage plus maxIterations for the last,
 * about 1.1 evaluations per iteration) runs out first.
 */
export function estimateRunSeconds(
  width: number,
  height: number,
  maxIterations: number,
  seedRounds: number,
): number {
  const padded = 1.5625 * width * height;
  const reference = 2048 * 2048;
  const pair = (FFT_PAIR_SECONDS_2048 * (padded * Math.log2(padded))) / (reference * Math.log2(reference));
  const settled = TYPICAL_EVALUATIONS * (1 + 0.3 * (seedRounds - 2));
  const budget = 1.1 * maxIterations * (1 + (seedRounds + 1) / 3);
  return Math.min(settled, budget) * PAIRS_PER_EVALUATION * pair;
}

export const useRunsStore = defineStore('runs', () => {
  const run = ref<RunDetail | null>(null);
  const loading = ref(false);
  const error = ref<string | null>(null);

  async function load(runId: number): Promise<RunDetail | null> {
    loading.value = true;
    error.value = null;
    // Another run's state must not stand in for this one while it loads (the page would show it under this URL).
    if (run.value?.id !== runId) run.value = null;
    try {
      run.value = await runApi.get(runId);
      return run.value;
    } catch (failure) {
      error.value = failure instanceof Error ? failure.message : String(failure);
      run.value = null;
      return null;
    } finally {
      loading.value = false;
    }
  }

  /** Starts a run; the failure is shown and rethrown so the form can show field messages. */
  async function launch(imageId: number, settings: SeparationSettingsInput): Promise<number> {
    try {
      const created = await runApi.create(imageId, settings);
      return created.id;
    } catch (failure) {
      notifyError(failure);
      throw failure;
    }
  }

  /** Asks the server to stop the run; marks it optimistically and rolls back on failure. */
  async function cancel(): Promise<void> {
    const current = run.value;
    if (!current) return;
    const before = current.cancelRequested;
    current.cancelRequested = true;
    try {
      await runApi.cancel(current.id);
    } catch (failure) {
      current.cancelRequested = before;
      notifyError(failure);
    }
  }

  return { run, loading, error, load, launch, cancel };
});
