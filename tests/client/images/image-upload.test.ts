import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { VueWrapper } from '@vue/test-utils';

import { createApiClient } from '@/boot/api';
import ImageLibraryPage from '@/pages/ImageLibraryPage.vue';
import { makeUser } from '../support/fixtures';
import { mountPage, settle, unmountAll } from '../support/mount';
import { FakeXhr, makeImage, mockLibraryApi } from './library-support';

afterEach(unmountAll);
beforeEach(() => FakeXhr.install());

const owner = makeUser({ id: 1 });
const existing = makeImage();
// The names of the invented Aster Wide Survey sample files.
const radio = new File([new Uint8Array(2880)], 'aws-lyra-radio.fits');
const optical = new File([new Uint8Array(1000)], 'aws-lyra-optical.png');
const added = makeImage({ id: 31, name: 'aws-lyra-radio', originalFileName: 'aws-lyra-radio.fits' });

async function choose(wrapper: VueWrapper, files: File[]): Promise<void> {
  const input = wrapper.get('input[data-test="file-input"]');
  Object.defineProperty(input.element, 'files', { value: files, configurable: true });
  await input.trigger('change');
  await settle();
}

async function drop(wrapper: VueWrapper, files: File[]): Promise<void> {
  const event = new Event('drop', { bubbles: true, cancelable: true });
  Object.defineProperty(event, 'dataTransfer', { value: { files } });
  wrapper.get('[data-test="drop-zone"]').element.dispatchEvent(event);
  await settle();
}

function rows(wrapper: VueWrapper) {
  return wrapper.findAll('[data-test="upload-row"]');
}

describe('Image upload', () => {
  it('sends the file with the CSRF token, shows its progress and adds the image to the table', async () => {
    let listed = [existing];
    const api = mockLibraryApi({ 'GET /api/projects/:id/images': () => ({ body: listed }) });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await choose(wrapper, [radio]);

    expect(FakeXhr.instances).toHaveLength(1);
    const xhr = FakeXhr.instances[0]!;
    expect(xhr.method).toBe('POST');
    expect(xhr.url).toBe('/api/projects/7/images');
    expect(xhr.headers['x-csrf-token']).toBe('test-csrf-token');
    const sent = xhr.body?.get('file');
    expect(sent instanceof File && sent.name).toBe('aws-lyra-radio.fits');

    xhr.progress(1500, 3000);
    await settle();
    const progress = wrapper.get('[data-test="upload-progress"]');
    expect(progress.attributes('aria-valuenow')).toBe('50');
    expect(wrapper.get('[data-test="upload-percent"]').text()).toContain('50 %');

    listed = [added, existing];
    xhr.respond(201, added);
    await settle();
    expect(rows(wrapper)[0]?.attributes('data-state')).toBe('done');
    expect(rows(wrapper)[0]?.text()).toContain('Added to the library');
    expect(wrapper.get('[data-test="image-table"]').text()).toContain('aws-lyra-radio');
    // The table is read again from the server once the queue is empty.
    expect(api.callsTo('GET /api/projects/:id/images')).toHaveLength(2);
    api.expectNoUnexpectedCalls();
  });

  it.each([
    [413, 'payload_too_large', 'The file is 600 MiB; the upload limit is 512 MiB.'],
    [409, 'conflict', 'This image is already in the project as «LDF 1.4 GHz mosaic».'],
    [422, 'unprocessable', 'The FITS header ends before its END card.'],
  ])('shows the server refusal %i beside the file, word for word', async (status, code, message) => {
    const api = mockLibraryApi({ 'GET /api/projects/:id/images': { body: [existing] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await drop(wrapper, [radio]);
    FakeXhr.instances[0]!.respond(status, { error: { code, message } });
    await settle();
    const row = rows(wrapper)[0]!;
    expect(row.attributes('data-state')).toBe('failed');
    expect(row.get('[role="alert"]').text()).toBe(message);
    // Nothing was added, so the table is not read again.
    expect(api.callsTo('GET /api/projects/:id/images')).toHaveLength(1);
    api.expectNoUnexpectedCalls();
  });

  it('sends several files one after another; a refusal does not stop the next', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [existing] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await choose(wrapper, [radio, optical]);
    expect(FakeXhr.instances).toHaveLength(1);
    expect(rows(wrapper).map((row) => row.attributes('data-state'))).toEqual(['uploading', 'waiting']);

    FakeXhr.instances[0]!.respond(409, {
      error: { code: 'conflict', message: 'This image is already in the project as «LDF radio».' },
    });
    await settle();
    expect(FakeXhr.instances).toHaveLength(2);
    const second = FakeXhr.instances[1]!.body?.get('file');
    expect(second instanceof File && second.name).toBe('aws-lyra-optical.png');
    expect(rows(wrapper).map((row) => row.attributes('data-state'))).toEqual(['failed', 'uploading']);
  });

  it('refuses a file type the readers do not know without sending it', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [existing] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await choose(wrapper, [new File(['a,b'], 'catalogue.csv')]);
    expect(FakeXhr.instances).toHaveLength(0);
    expect(rows(wrapper)[0]?.get('[role="alert"]').text()).toContain('catalogue.csv is not a file type');
  });

  it('cancels a running upload', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [existing] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await choose(wrapper, [radio]);
    const cancel = rows(wrapper)[0]!
      .findAll('button')
      .find((button) => button.text() === 'Cancel');
    await cancel!.trigger('click');
    await settle();
    expect(FakeXhr.instances[0]!.aborted).toBe(true);
    expect(rows(wrapper)[0]?.attributes('data-state')).toBe('cancelled');
  });

  it('says so in plain words when the connection breaks', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [existing] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await choose(wrapper, [radio]);
    FakeXhr.instances[0]!.fail();
    await settle();
    expect(rows(wrapper)[0]?.get('[role="alert"]').text()).toBe(
      'The Skysieve server cannot be reached. Check your connection and try again.',
    );
  });
});

describe('Who sees the upload control', () => {
  it.each([
    ['owner', false, true],
    ['editor', false, true],
    ['viewer', false, false],
    [null, true, true],
  ] as const)('role %s (site admin: %s) → upload offered: %s', async (role, admin, offered) => {
    const api = mockLibraryApi({ 'GET /api/projects/:id/images': { body: [existing] } }, { role });
    const user = makeUser({ id: 1, role: admin ? 'admin' : 'member' });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user });
    expect(wrapper.find('[data-test="choose-files"]').exists()).toBe(offered);
    expect(wrapper.find('[data-test="drop-zone"]').exists()).toBe(offered);
    expect(wrapper.find('[data-test="upload-note"]').exists()).toBe(!offered);
    if (!offered) expect(wrapper.get('[data-test="upload-note"]').text()).toContain('owners and editors');
    api.expectNoUnexpectedCalls();
  });

  it('labels the choose button for people using a keyboard or a screen reader', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    const button = wrapper.get('button[data-test="choose-files"]');
    expect(button.attributes('aria-label')).toBe('Choose image files to upload');
    expect(button.attributes('tabindex')).not.toBe('-1');
    const input = wrapper.get('input[data-test="file-input"]');
    expect(wrapper.get(`label[for="${input.attributes('id')}"]`).text()).toBe('Image files to upload');
    expect(input.attributes('accept')).toBe('.fits,.fit,.fts,.fits.gz,.tif,.tiff,.png,.jpg,.jpeg');
  });
});

describe('api.images.upload', () => {
  it('fetches a fresh CSRF token and sends the file again once when the token was refused', async () => {
    let tokens = 0;
    mockLibraryApi({ 'GET /api/auth/csrf': () => ({ body: { token: `token-${++tokens}` } }) });
    const client = createApiClient();
    const seen: number[] = [];
    const done = client.images.upload(7, radio, radio.name, {
      name: 'LDF radio',
      onProgress: ({ loaded }) => seen.push(loaded),
    });
    await settle();
    const first = FakeXhr.instances[0]!;
    expect(first.headers['x-csrf-token']).toBe('token-1');
    expect(first.body?.get('name')).toBe('LDF radio');
    first.respond(403, { error: { code: 'csrf_invalid', message: 'The form expired.' } });
    await settle();
    const second = FakeXhr.instances[1]!;
    expect(second.headers['x-csrf-token']).toBe('token-2');
    second.progress(2880, 2880);
    second.respond(201, added);
    await expect(done).resolves.toEqual(added);
    expect(seen).toEqual([2880]);
  });

  it('refuses a 201 answer of the wrong shape', async () => {
    mockLibraryApi({});
    const done = createApiClient().images.upload(7, radio, radio.name);
    await settle();
    FakeXhr.instances[0]!.respond(201, { id: 'not a number' });
    await expect(done).rejects.toThrow(
      "The server's answer to POST /api/projects/7/images did not have the expected shape.",
    );
  });
});
