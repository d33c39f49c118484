/**
 * What a drop zone for files does: highlights while files are dragged over it (counting enter/leave, so that
 * moving over its own children does not switch the highlight off), hands over dropped or chosen files unless it
 * is disabled, and clears the hidden file input afterwards so that the same file can be chosen again after a
 * refusal. Bind `input` as the template ref of the `<input type="file">`.
 */
import { ref } from 'vue';

export interface FileDropOptions {
  /** Whether files are refused for now. */
  disabled: () => boolean;
  /** Called with the dropped or chosen files (at least one). */
  onFiles: (files: File[]) => void;
}

export function useFileDrop(options: FileDropOptions) {
  const input = ref<HTMLInputElement | null>(null);
  const over = ref(false);
  let depth = 0;

  function take(list: FileList | null | undefined): void {
    const chosen = list ? [...list] : [];
    if (chosen.length > 0 && !options.disabled()) options.onFiles(chosen);
  }

  function onDragEnter(): void {
    depth++;
    over.value = true;
  }

  function onDragLeave(): void {
    depth = Math.max(0, depth - 1);
    if (depth === 0) over.value = false;
  }

  function onDrop(event: DragEvent): void {
    depth = 0;
    over.value = false;
    take(event.dataTransfer?.files);
  }

  function onChosen(): void {
    take(input.value?.files);
    if (input.value) input.value.value = '';
  }

  /** Opens the browser's file picker. */
  function choose(): void {
    input.value?.click();
  }

  return { input, over, onDragEnter, onDragLeave, onDrop, onChosen, choose };
}
