/**
 * Reference catalogues of a project and cross-matches of a run: every call goes through the app's one API client
 * (answers parsed with the shared schemas in shared/cross-match.ts); file uploads are multipart posts with the
 * CSRF token (api.postForm). The store keeps the project's catalogues and the last match, and sends every
 * failure to the one notification helper.
 */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import {
  crossMatchResultSchema,
  referenceCatalogueDetailSchema,
  referenceCatalogueListSchema,
  referencePreviewSchema,
  type ColumnMappingInput,
  type CrossMatchRequest,
  type CrossMatchResultDto,
  type ReferenceCatalogueDetail,
  type ReferenceCatalogueSummary,
  type ReferencePositions,
  type ReferencePreview,
} from '@shared/cross-match';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

const id = (value: number) => encodeURIComponent(String(value));

/** How the file should be read: a name for the project, the columns chosen (the rest guessed), sky or pixel. */
export interface ReadChoices {
  name?: string;
  mapping?: ColumnMappingInput;
  positions?: ReferencePositions;
}

function formOf(file: Blob, fileName: string, choices: ReadChoices): () => FormData {
  return () => {
    const form = new FormData();
    if (choices.name) form.set('name', choices.name);
    if (choices.positions) form.set('positions', choices.positions);
    const mapping = Object.fromEntries(Object.entries(choices.mapping ?? {}).filter(([, column]) => column));
    if (Object.keys(mapping).length > 0) form.set('mapping', JSON.stringify(mapping));
    form.set('file', file, fileName);
    return form;
  };
}

export const crossMatchApi = {
  list: (projectId: number): Promise<ReferenceCatalogueSummary[]> =>
    api
      .request('GET', `/api/projects/${id(projectId)}/reference-catalogues`, {
        schema: referenceCatalogueListSchema,
      })
      .then((list) => list.referenceCatalogues),
  get: (projectId: number, catalogueId: number): Promise<ReferenceCatalogueDetail> =>
    api.request('GET', `/api/projects/${id(projectId)}/reference-catalogues/${id(catalogueId)}`, {
      schema: referenceCatalogueDetailSchema,
    }),
  preview: (
    projectId: number,
    file: Blob,
    fileName: string,
    choices: ReadChoices = {},
  ): Promise<ReferencePreview> =>
    api.postForm(
      `/api/projects/${id(projectId)}/reference-catalogues/preview`,
      formOf(file, fileName, choices),
      referencePreviewSchema,
    ),
  upload: (
    projectId: number,
    file: Blob,
    fileName: string,
    choices: ReadChoices = {},
  ): Promise<ReferenceCatalogueDetail> =>
    api.postForm(
      `/api/projects/${id(projectId)}/reference-catalogues`,
      formOf(file, fileName, choices),
      referenceCatalogueDetailSchema,
    ),
  remove: (projectId: number, catalogueId: number) =>
    api.request<void>('DELETE', `/api/projects/${id(projectId)}/reference-catalogues/${id(catalogueId)}`),
  match: (runId: number, body: CrossMatchRequest): Promise<CrossMatchResultDto> =>
    api.request('POST', `/api/runs/${id(runId)}/cross-match`, { body, schema: crossMatchResultSchema }),
  /** A download link of the matched table for the same request. */
  exportUrl: (runId: number, body: CrossMatchRequest, format: 'csv' | 'votable' | 'fits'): string => {
    const search = new URLSearchParams({ kind: body.against.kind, against: String(body.against.id), format });
    if (body.radiusArcsec !== undefined) search.set('radiusArcsec', String(body.radiusArcsec));
    if (body.radiusPixels !== undefined) search.set('radiusPixels', String(body.radiusPixels));
    return `/api/runs/${id(runId)}/cross-match?${search.toString()}`;
  },
};

export const useCrossMatchStore = defineStore('cross-match', () => {
  const catalogues = ref<ReferenceCatalogueSummary[]>([]);
  const cataloguesLoading = ref(false);
  const cataloguesError = ref<string | null>(null);
  const result = ref<CrossMatchResultDto | null>(null);
  /** The request the result answers (for the export links). */
  const resultRequest = ref<CrossMatchRequest | null>(null);
  const matching = ref(false);
  const matchError = ref<string | null>(null);

  async function loadCatalogues(projectId: number): Promise<void> {
    cataloguesLoading.value = true;
    cataloguesError.value = null;
    try {
      catalogues.value = await crossMatchApi.list(projectId);
    } catch (failure) {
      cataloguesError.value = messageOf(failure);
    } finally {
      cataloguesLoading.value = false;
    }
  }

  /** Stores a catalogue; the failure is shown and rethrown so the upload panel can keep its state. */
  async function upload(
    projectId: number,
    file: Blob,
    fileName: string,
    choices: ReadChoices,
  ): Promise<ReferenceCatalogueDetail> {
    try {
      const stored = await crossMatchApi.upload(projectId, file, fileName, choices);
      catalogues.value = [stored, ...catalogues.value.filter((c) => c.id !== stored.id)];
      return stored;
    } catch (failure) {
      notifyError(failure);
      throw failure;
    }
  }

  /** Removes a catalogue at once and puts it back if the server refuses. */
  async function remove(projectId: number, catalogueId: number): Promise<boolean> {
    const before = catalogues.value;
    catalogues.value = before.filter((c) => c.id !== catalogueId);
    try {
      await crossMatchApi.remove(projectId, catalogueId);
      if (
        resultRequest.value?.against.kind === 'reference' &&
        resultRequest.value.against.id === catalogueId
      ) {
        result.value = null;
        resultRequest.value = null;
      }
      return true;
    } catch (failure) {
      catalogues.value = before;
      notifyError(failure);
      return false;
    }
  }

  async function match(runId: number, request: CrossMatchRequest): Promise<CrossMatchResultDto | null> {
    matching.value = true;
    matchError.value = null;
    try {
      result.value = await crossMatchApi.match(runId, request);
      resultRequest.value = request;
      return result.value;
    } catch (failure) {
      matchError.value = messageOf(failure);
      return null;
    } finally {
      matching.value = false;
    }
  }

  return {
    catalogues,
    cataloguesLoading,
    cataloguesError,
    result,
    resultRequest,
    matching,
    matchError,
    loadCatalogues,
    upload,
    remove,
    match,
  };
});
