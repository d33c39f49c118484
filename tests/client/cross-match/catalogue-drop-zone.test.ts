import { afterEach, describe, expect, it } from 'vitest';

import CatalogueDropZone from '@/components/crossmatch/CatalogueDropZone.vue';
import { mountPage, unmountAll } from '../support/mount';

afterEach(unmountAll);

// Invented files of the Lyra Deep Field.
const first = new File(['label,ra,dec\nq1,277.5,36.2\n'], 'lyra-reference.csv');
const second = new File(['<VOTABLE/>'], 'lyra-reference.xml');

async function zone(disable = false) {
  const { wrapper } = await mountPage(CatalogueDropZone, { props: { disable } });
  return wrapper.getComponent(CatalogueDropZone);
}

function drag(
  wrapper: Awaited<ReturnType<typeof zone>>,
  type: 'dragenter' | 'dragleave' | 'drop',
  files: File[] = [],
): void {
  const event = new Event(type, { bubbles: true, cancelable: true });
  Object.defineProperty(event, 'dataTransfer', { value: { files } });
  wrapper.get('[data-test="catalogue-drop-zone"]').element.dispatchEvent(event);
}

describe('CatalogueDropZone', () => {
  it('hands over the first chosen file and clears the input so the same file can be chosen again', async () => {
    const wrapper = await zone();
    const input = wrapper.get('input[data-test="catalogue-file-input"]');
    Object.defineProperty(input.element, 'files', { value: [first, second], configurable: true });
    await input.trigger('change');
    expect(wrapper.emitted('file')).toEqual([[first]]);
    expect((input.element as HTMLInputElement).value).toBe('');
  });

  it('hands over a dropped file, and highlights until the drag has left it and its children', async () => {
    const wrapper = await zone();
    const over = () => wrapper.get('[data-test="catalogue-drop-zone"]').classes('ss-catalogue-drop--over');
    drag(wrapper, 'dragenter');
    drag(wrapper, 'dragenter'); // onto the icon inside the zone
    await wrapper.vm.$nextTick();
    expect(over()).toBe(true);
    drag(wrapper, 'dragleave');
    await wrapper.vm.$nextTick();
    expect(over()).toBe(true);
    drag(wrapper, 'drop', [second]);
    await wrapper.vm.$nextTick();
    expect(over()).toBe(false);
    expect(wrapper.emitted('file')).toEqual([[second]]);
  });

  it('refuses files while disabled, and an empty drop', async () => {
    const disabled = await zone(true);
    drag(disabled, 'drop', [first]);
    expect(disabled.get('button[data-test="choose-catalogue"]').attributes('disabled')).toBeDefined();
    const enabled = await zone();
    drag(enabled, 'drop', []);
    expect(disabled.emitted('file')).toBeUndefined();
    expect(enabled.emitted('file')).toBeUndefined();
  });
});
