/**
 * Injection studies of one run (completeness, flux bias, false-source rate) and its number counts: start a
 * study, follow it while its trials run (polled every two seconds), cancel or delete it. JSON through the app's
 * one API client, parsed with the shared schemas; failures go to the one notification helper.
 */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import {
  injectionStudyDetailSchema,
  injectionStudyListSchema,
  injectionStudySchema,
  isTerminalInjectionStatus,
  numberCountsSchema,
  type CreateInjectionStudyRequest,
  type InjectionStudy,
  type InjectionStudyDetail,
  type NumberCounts,
} from '@shared/injection';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

const id = (value: number) => encodeURIComponent(String(value));
const studiesPath = (runId: number) => `/api/runs/${id(runId)}/injection-studies`;

export const injectionApi = {
  list: (runId: number): Promise<InjectionStudy[]> =>
    api.request('GET', studiesPath(runId), { schema: injectionStudyListSchema }).then((list) => list.studies),
  get: (runId: number, studyId: number): Promise<InjectionStudyDetail> =>
    api.request('GET', `${studiesPath(runId)}/${id(studyId)}`, { schema: injectionStudyDetailSchema }),
  create: (runId: number, body: CreateInjectionStudyRequest): Promise<InjectionStudy> =>
    api.request('POST', studiesPath(runId), { body, schema: injectionStudySchema }),
  cancel: (runId: number, studyId: number): Promise<InjectionStudy> =>
    api.request('POST', `${studiesPath(runId)}/${id(studyId)}/cancel`, { schema: injectionStudySchema }),
  remove: (runId: number, studyId: number) =>
    api.request<void>('DELETE', `${studiesPath(runId)}/${id(studyId)}`),
  numberCounts: (runId: number, bins?: string): Promise<NumberCounts> =>
    api.request('GET', `/api/runs/${id(runId)}/number-counts`, {
      query: { bins: bins?.trim() || undefined },
      schema: numberCountsSchema,
    }),
};

export const useInjectionStore = defineStore('injection', () => {
  const runId = ref<number | null>(null);
  const studies = ref<InjectionStudy[]>([]);
  const current = ref<InjectionStudyDetail | null>(null);
  const loading = ref(false);
  const error = ref<string | null>(null);
  const starting = ref(false);
  let timer: ReturnType<typeof setTimeout> | null = null;

  function stopFollowing(): void {
    if (timer) clearTimeout(timer);
    timer = null;
  }

  async function open(studyId: number): Promise<void> {
    if (runId.value === null) return;
    stopFollowing();
    try {
      current.value = await injectionApi.get(runId.value, studyId);
    } catch (failure) {
      error.value = messageOf(failure);
      return;
    }
    follow();
  }

  /** Polls the open study until it ends, then refreshes the list (its status changed). */
  function follow(): void {
    const study = current.value;
    if (!study || isTerminalInjectionStatus(study.status) || runId.value === null) return;
    const run = runId.value;
    timer = setTimeout(() => {
      void injectionApi
        .get(run, study.id)
        .then((detail) => {
          if (current.value?.id !== detail.id) return;
          current.value = detail;
          if (isTerminalInjectionStatus(detail.status)) void refreshList();
          else follow();
        })
        .catch(() => follow());
    }, 2000);
  }

  async function refreshList(): Promise<void> {
    if (runId.value === null) return;
    studies.value = await injectionApi.list(runId.value);
  }

  async function load(run: number): Promise<void> {
    stopFollowing();
    runId.value = run;
    loading.value = true;
    error.value = null;
    current.value = null;
    try {
      await refreshList();
      const newest = studies.value[0];
      if (newest) await open(newest.id);
    } catch (failure) {
      error.value = messageOf(failure);
    } finally {
      loading.value = false;
    }
  }

  async function start(body: CreateInjectionStudyRequest): Promise<boolean> {
    if (runId.value === null) return false;
    starting.value = true;
    try {
      const study = await injectionApi.create(runId.value, body);
      await refreshList();
      await open(study.id);
      return true;
    } catch (failure) {
      notifyError(failure);
      return false;
    } finally {
      starting.value = false;
    }
  }

  async function cancel(): Promise<void> {
    if (runId.value === null || !current.value) return;
    const previous = current.value.cancelRequested;
    current.value.cancelRequested = true;
    try {
      await injectionApi.cancel(runId.value, current.value.id);
      await open(current.value.id);
    } catch (failure) {
      if (current.value) current.value.cancelRequested = previous;
      notifyError(failure);
    }
  }

  async function remove(studyId: number): Promise<void> {
    if (runId.value === null) return;
    const before = studies.value;
    studies.value = studies.value.filter((study) => study.id !== studyId);
    try {
      await injectionApi.remove(runId.value, studyId);
      if (current.value?.id === studyId) {
        current.value = null;
        const newest = studies.value[0];
        if (newest) await open(newest.id);
      }
    } catch (failure) {
      studies.value = before;
      notifyError(failure);
    }
  }

  return {
    runId,
    studies,
    current,
    loading,
    error,
    starting,
    load,
    open,
    start,
    cancel,
    remove,
    stopFollowing,
  };
});
