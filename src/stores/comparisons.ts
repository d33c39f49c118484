/**
 * Saved comparisons of runs: save one from a choice of runs, read it (runs, settings that differ), rename it or
 * change its component (optimistic, rolled back on failure), delete it; and its derived results, the diffuse
 * difference of two runs (a float32 view, read like the component views) and the cross-match of two catalogues.
 */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import {
  comparisonDetailSchema,
  comparisonListSchema,
  comparisonSummarySchema,
  runCrossMatchSchema,
  type ComparisonDetail,
  type ComparisonSummary,
  type CreateComparisonRequest,
  type RunCrossMatch,
  type UpdateComparisonRequest,
} from '@shared/comparisons';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';
import { fetchPlane, type ComponentPlane } from '@/stores/runs';

const id = (value: number) => encodeURIComponent(String(value));

export const comparisonApi = {
  create: (projectId: number, body: CreateComparisonRequest): Promise<ComparisonDetail> =>
    api.request('POST', `/api/projects/${id(projectId)}/comparisons`, {
      body,
      schema: comparisonDetailSchema,
    }),
  list: (projectId: number): Promise<ComparisonSummary[]> =>
    api
      .request('GET', `/api/projects/${id(projectId)}/comparisons`, { schema: comparisonListSchema })
      .then((list) => list.comparisons),
  get: (comparisonId: number): Promise<ComparisonDetail> =>
    api.request('GET', `/api/comparisons/${id(comparisonId)}`, { schema: comparisonDetailSchema }),
  update: (comparisonId: number, body: UpdateComparisonRequest): Promise<ComparisonSummary> =>
    api.request('PATCH', `/api/comparisons/${id(comparisonId)}`, { body, schema: comparisonSummarySchema }),
  remove: (comparisonId: number) => api.request<void>('DELETE', `/api/comparisons/${id(comparisonId)}`),
  /** diffuse(a) − diffuse(b), block-averaged so that its longest side is at most maxSize. */
  difference: (comparisonId: number, a: number, b: number, maxSize = 1024): Promise<ComponentPlane> =>
    fetchPlane(
      `/api/comparisons/${id(comparisonId)}/difference?a=${id(a)}&b=${id(b)}&maxSize=${maxSize}`,
      `The difference of runs ${a} and ${b}`,
    ),
  crossMatch: (comparisonId: number, a: number, b: number): Promise<RunCrossMatch> =>
    api.request('GET', `/api/comparisons/${id(comparisonId)}/cross-match`, {
      query: { a, b },
      schema: runCrossMatchSchema,
    }),
};

export const useComparisonsStore = defineStore('comparisons', () => {
  const comparison = ref<ComparisonDetail | null>(null);
  const loading = ref(false);
  const error = ref<string | null>(null);

  async function load(comparisonId: number): Promise<ComparisonDetail | null> {
    loading.value = true;
    error.value = null;
    try {
      comparison.value = await comparisonApi.get(comparisonId);
      return comparison.value;
    } catch (failure) {
      error.value = messageOf(failure);
      comparison.value = null;
      return null;
    } finally {
      loading.value = false;
    }
  }

  /** Saves a new comparison; the failure is shown and rethrown so the picker can keep its choice. */
  async function create(projectId: number, body: CreateComparisonRequest): Promise<ComparisonDetail> {
    try {
      return await comparisonApi.create(projectId, body);
    } catch (failure) {
      notifyError(failure);
      throw failure;
    }
  }

  /** Renames and/or re-points the loaded comparison at once; puts the old values back when refused. */
  async function update(body: UpdateComparisonRequest): Promise<boolean> {
    const current = comparison.value;
    if (!current) return false;
    const before = { name: current.name, component: current.component };
    if (body.name !== undefined) current.name = body.name.trim();
    if (body.component !== undefined) current.component = body.component;
    try {
      const saved = await comparisonApi.update(current.id, body);
      current.name = saved.name;
      current.component = saved.component;
      current.updatedAt = saved.updatedAt;
      return true;
    } catch (failure) {
      current.name = before.name;
      current.component = before.component;
      notifyError(failure);
      return false;
    }
  }

  async function remove(): Promise<boolean> {
    const current = comparison.value;
    if (!current) return false;
    try {
      await comparisonApi.remove(current.id);
      comparison.value = null;
      return true;
    } catch (failure) {
      notifyError(failure);
      return false;
    }
  }

  return { comparison, loading, error, load, create, update, remove };
});
