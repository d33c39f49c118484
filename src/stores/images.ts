/** Images of the open project, and the one whose details are open. */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import {
  imageDetailSchema,
  imageListSchema,
  imageSummarySchema,
  type ImageDetail,
  type ImageSummary,
} from '@shared/images';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

export const useImagesStore = defineStore('images', () => {
  const projectId = ref<number | null>(null);
  const images = ref<ImageSummary[]>([]);
  const loading = ref(false);
  const error = ref<string | null>(null);
  const loaded = ref(false);

  const detail = ref<ImageDetail | null>(null);
  const detailLoading = ref(false);
  const detailError = ref<string | null>(null);

  async function fetchImages(id: number): Promise<void> {
    if (projectId.value !== id) {
      images.value = [];
      loaded.value = false;
      detail.value = null;
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

  return {
    projectId,
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
