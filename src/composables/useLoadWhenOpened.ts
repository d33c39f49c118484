/**
 * A list that a folded section reads the first time it is opened (not when the page loads): `open` starts the
 * first read, `refresh` reads again; when `key` changes (another image or project) the list is emptied and, if
 * the section was opened, read again. A failed read leaves its message in `error` (the list as it was).
 */
import { ref, watch, type Ref } from 'vue';

import { messageOf } from '@/boot/notify';

export interface LoadWhenOpenedOptions {
  /** Called as every read starts (e.g. to clear a choice made in the old list). */
  beforeLoad?: () => void;
}

export function useLoadWhenOpened<Item>(
  read: () => Promise<Item[]>,
  key: () => unknown,
  options: LoadWhenOpenedOptions = {},
) {
  const data = ref([]) as Ref<Item[]>;
  const loading = ref(false);
  const error = ref<string | null>(null);
  const opened = ref(false);

  async function refresh(): Promise<void> {
    loading.value = true;
    error.value = null;
    options.beforeLoad?.();
    try {
      data.value = await read();
    } catch (failure) {
      error.value = messageOf(failure);
    } finally {
      loading.value = false;
    }
  }

  function open(): void {
    if (!opened.value) void refresh();
    opened.value = true;
  }

  watch(key, () => {
    data.value = [];
    if (opened.value) void refresh();
  });

  return { data, loading, error, refresh, open };
}
