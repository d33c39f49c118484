import { flushPromises } from '@vue/test-utils';
import { describe, expect, it } from 'vitest';
import { effectScope, ref } from 'vue';

import { useLoadWhenOpened } from '@/composables/useLoadWhenOpened';

/** A list reader that answers from `answers` in turn (an Error is thrown), counting its calls. */
function reader(answers: (string[] | Error)[]) {
  const calls: number[] = [];
  const read = async () => {
    const answer = answers[calls.length];
    calls.push(calls.length);
    if (answer instanceof Error) throw answer;
    return answer ?? [];
  };
  return { read, calls };
}

describe('useLoadWhenOpened', () => {
  it('reads only once the section is first opened, and again on refresh', async () => {
    const { read, calls } = reader([['lyra-1'], ['lyra-1', 'lyra-2']]);
    const scope = effectScope();
    const list = scope.run(() => useLoadWhenOpened(read, () => 1))!;
    await flushPromises();
    expect(calls).toHaveLength(0);
    list.open();
    list.open();
    expect(list.loading.value).toBe(true);
    await flushPromises();
    expect(calls).toHaveLength(1);
    expect(list.data.value).toEqual(['lyra-1']);
    expect(list.loading.value).toBe(false);
    await list.refresh();
    expect(list.data.value).toEqual(['lyra-1', 'lyra-2']);
    scope.stop();
  });

  it('keeps the list and gives the message when a read fails; clears the message on the next read', async () => {
    const { read } = reader([['lyra-1'], new Error('The server is not answering.'), ['lyra-3']]);
    const scope = effectScope();
    const list = scope.run(() => useLoadWhenOpened(read, () => 1))!;
    await list.refresh();
    await list.refresh();
    expect(list.error.value).toBe('The server is not answering.');
    expect(list.data.value).toEqual(['lyra-1']);
    await list.refresh();
    expect(list.error.value).toBeNull();
    expect(list.data.value).toEqual(['lyra-3']);
    scope.stop();
  });

  it('empties the list when the key changes, and reads again only if the section was opened', async () => {
    let finishSecond: (names: string[]) => void = () => undefined;
    const answers = [
      Promise.resolve(['field-a']),
      new Promise<string[]>((resolve) => (finishSecond = resolve)),
    ];
    let calls = 0;
    const key = ref(1);
    let started = 0;
    const scope = effectScope();
    const list = scope.run(() =>
      useLoadWhenOpened(
        () => answers[calls++]!,
        () => key.value,
        { beforeLoad: () => (started += 1) },
      ),
    )!;
    key.value = 2;
    await flushPromises();
    expect(calls).toBe(0);
    list.open();
    await flushPromises();
    expect(list.data.value).toEqual(['field-a']);
    key.value = 3;
    await flushPromises();
    expect(list.data.value).toEqual([]);
    expect(list.loading.value).toBe(true);
    finishSecond(['field-b']);
    await flushPromises();
    expect(list.data.value).toEqual(['field-b']);
    expect(started).toBe(2);
    scope.stop();
  });
});
