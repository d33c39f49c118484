/** Images of the open project, and the one whose details are open. */
import { defineStore } from 'pinia';
import { computed, ref } from 'vue';

import {
  imageDetailSchema,
  imageListSchema,
  imageSummarySchema,
  type ImageDetail,
  type ImageSummary,
} from '@shared/images';
import type { ProjectRole } from '@shared/projects';
import { api, ApiError } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

/** File name endings the server's readers accept (FITS, optionally gzip-compressed; TIFF; PNG; JPEG). */
export const ACCEPTED_IMAGE_SUFFIXES = [
  '.fits',
  '.fit',
  '.fts',
  '.fits.gz',
  '.tif',
  '.tiff',
  '.png',
  '.jpg',
  '.jpeg',
] as const;

export function isAcceptedImageName(fileName: string): boolean {
  const lower = fileName.toLowerCase();
  return ACCEPTED_IMAGE_SUFFIXES.some((suffix) => lower.endsWith(suffix));
}

export type UploadState = 'waiting' | 'uploading' | 'done' | 'failed' | 'cancelled';

/** One file of the upload queue, as the page shows it. */
export interface UploadItem {
  key: number;
  fileName: string;
  bytes: number;
  /** Bytes sent so far; `total` is what the browser reports it is sending (the file plus form framing). */
  loaded: number;
  total: number;
  state: UploadState;
  /** The server's refusal (or the client's own) in the words it was sent, when state is 'failed'. */
  message: string | null;
  /** The image the upload created, when done. */
  image: ImageSummary | null;
}

export const useImagesStore = defineStore('images', () => {
  const projectId = ref<number | null>(null);
  const images = ref<ImageSummary[]>([]);
  const loading = ref(false);
  const error = ref<string | null>(null);
  const loaded = ref(false);

  const detail = ref<ImageDetail | null>(null);
  const detailLoading = ref(false);
  const detailError = ref<string | null>(null);

  /** The caller's role in the open project (null: not a member, e.g. an administrator looking in). */
  const role = ref<ProjectRole | null>(null);
  const roleKnown = ref(false);
  const roleError = ref<string | null>(null);

  const uploads = ref<UploadItem[]>([]);
  const files = new Map<number, { file: File; projectId: number }>();
  const controllers = new Map<number, AbortController>();
  let nextKey = 1;
  let draining = false;

  async function fetchImages(id: number): Promise<void> {
    if (projectId.value !== id) {
      images.value = [];
      loaded.value = false;
      detail.value = null;
      role.value = null;
      roleKnown.value = false;
      clearFinishedUploads();
    }
    projectId.value = id;
    loading.value = true;
    error.value = null;
    try {
      images.value = await api.request('GET', `/api/projects/${id}/images`, { schema: imageListSchema });
      loaded.value = true;
    } catch (failure) {
      error.value = messageOf(failure);
      notifyError(failure);
    } finally {
      loading.value = false;
    }
  }

  async function fetchDetail(imageId: number): Promise<void> {
    detailLoading.value = true;
    detailError.value = null;
    if (detail.value?.id !== imageId) detail.value = null;
    try {
      detail.value = await api.request('GET', `/api/images/${imageId}`, { schema: imageDetailSchema });
    } catch (failure) {
      detailError.value = messageOf(failure);
      notifyError(failure);
    } finally {
      detailLoading.value = false;
    }
  }

  function patchLocal(imageId: number, patch: Partial<ImageSummary>): void {
    images.value = images.value.map((image) => (image.id === imageId ? { ...image, ...patch } : image));
    if (detail.value?.id === imageId) detail.value = { ...detail.value, ...patch };
  }

  /** Renames at once on screen; puts the old name back if the server refuses. */
  async function rename(imageId: number, name: string): Promise<boolean> {
    const before = images.value.find((image) => image.id === imageId)?.name ?? detail.value?.name;
    patchLocal(imageId, { name });
    try {
      const saved = await api.request('PATCH', `/api/images/${imageId}`, {
        body: { name },
        schema: imageSummarySchema,
      });
      patchLocal(imageId, saved);
      return true;
    } catch (failure) {
      if (before !== undefined) patchLocal(imageId, { name: before });
      notifyError(failure);
      return false;
    }
  }

  /** Removes at once on screen; puts the image back where it was if the server refuses. */
  async function remove(imageId: number): Promise<boolean> {
    const index = images.value.findIndex((image) => image.id === imageId);
    const removed = images.value[index];
    const openDetail = detail.value;
    images.value = images.value.filter((image) => image.id !== imageId);
    if (detail.value?.id === imageId) detail.value = null;
    try {
      await api.request('DELETE', `/api/images/${imageId}`);
      return true;
    } catch (failure) {
      if (removed) images.value = [...images.value.slice(0, index), removed, ...images.value.slice(index)];
      if (openDetail?.id === imageId) detail.value = openDetail;
      notifyError(failure);
      return false;
    }
  }

  /** Who may upload is decided by the project role; this asks the server for it. */
  async function fetchRole(id: number): Promise<void> {
    roleError.value = null;
    try {
      const project = await api.projects.get(id);
      if (projectId.value === null || projectId.value === id) {
        role.value = project.myRole;
        roleKnown.value = true;
      }
    } catch (failure) {
      roleError.value = messageOf(failure);
    }
  }

  function update(key: number, patch: Partial<UploadItem>): void {
    uploads.value = uploads.value.map((item) => (item.key === key ? { ...item, ...patch } : item));
  }

  /**
   * Puts files in the queue of the given project; they are sent one after another. A file whose name the
   * readers do not accept is refused at once, without sending it.
   */
  function enqueueUploads(id: number, chosen: readonly File[]): void {
    for (const file of chosen) {
      const key = nextKey++;
      const accepted = isAcceptedImageName(file.name);
      uploads.value = [
        ...uploads.value,
        {
          key,
          fileName: file.name,
          bytes: file.size,
          loaded: 0,
          total: file.size,
          state: accepted ? 'waiting' : 'failed',
          message: accepted
            ? null
            : `${file.name} is not a file type Skysieve reads. Choose a FITS file (.fits, .fit, .fts, .fits.gz), a TIFF (.tif, .tiff), a PNG or a JPEG.`,
          image: null,
        },
      ];
      if (accepted) files.set(key, { file, projectId: id });
    }
    void drain();
  }

  async function drain(): Promise<void> {
    if (draining) return;
    draining = true;
    const changed = new Set<number>();
    try {
      for (;;) {
        const item = uploads.value.find((candidate) => candidate.state === 'waiting');
        if (!item) break;
        const queued = files.get(item.key);
        files.delete(item.key);
        if (!queued) {
          update(item.key, { state: 'cancelled' });
          continue;
        }
        const { file, projectId: id } = queued;
        const controller = new AbortController();
        controllers.set(item.key, controller);
        update(item.key, { state: 'uploading' });
        try {
          const image = await api.images.upload(id, file, file.name, {
            signal: controller.signal,
            onProgress: ({ loaded, total }) => update(item.key, { loaded, total: total ?? item.bytes }),
          });
          update(item.key, { state: 'done', image, loaded: item.bytes, total: item.bytes });
          if (projectId.value === id)
            images.value = [image, ...images.value.filter((i) => i.id !== image.id)];
          changed.add(id);
        } catch (failure) {
          if (failure instanceof ApiError && failure.code === 'cancelled') {
            update(item.key, { state: 'cancelled', message: null });
          } else {
            update(item.key, { state: 'failed', message: messageOf(failure) });
          }
        } finally {
          controllers.delete(item.key);
        }
      }
    } finally {
      draining = false;
    }
    // The table shows what the server holds now (other members may have uploaded meanwhile).
    const open = projectId.value;
    if (open !== null && changed.has(open)) await fetchImages(open);
  }

  /** Stops a waiting or running upload. */
  function cancelUpload(key: number): void {
    const controller = controllers.get(key);
    if (controller) {
      controller.abort();
      return;
    }
    if (files.delete(key)) update(key, { state: 'cancelled' });
  }

  function dismissUpload(key: number): void {
    uploads.value = uploads.value.filter((item) => item.key !== key || item.state === 'uploading');
    files.delete(key);
  }

  function clearFinishedUploads(): void {
    uploads.value = uploads.value.filter((item) => item.state === 'uploading' || item.state === 'waiting');
  }

  const uploading = computed(() => uploads.value.some((item) => item.state === 'uploading'));

  return {
    projectId,
    role,
    roleKnown,
    roleError,
    uploads,
    uploading,
    fetchRole,
    enqueueUploads,
    cancelUpload,
    dismissUpload,
    clearFinishedUploads,
    images,
    loading,
    error,
    loaded,
    detail,
    detailLoading,
    detailError,
    fetchImages,
    fetchDetail,
    rename,
    remove,
  };
});
