import { afterEach, describe, expect, it } from 'vitest';

import type { ImageDetail } from '@shared/images';
import ImageLibraryPage from '@/pages/ImageLibraryPage.vue';
import { apiError } from '../support/api-mock';
import { makeUser } from '../support/fixtures';
import { makeImage, mockLibraryApi } from './library-support';
import { mountPage, notifications, pageText, settle, unmountAll } from '../support/mount';

afterEach(unmountAll);

const mosaic = makeImage();
const counts = makeImage({
  id: 12,
  name: 'LDF X-ray counts',
  originalFileName: 'ldf-counts.fits.gz',
  gzipped: true,
  width: 512,
  height: 512,
  unit: 'count',
  beam: null,
  wcs: null,
  noise: null,
  createdAt: '2026-03-03T10:00:00.000Z',
});
const mosaicDetail: ImageDetail = {
  ...mosaic,
  header: [
    { keyword: 'SIMPLE', value: true },
    { keyword: 'BUNIT', value: 'Jy/beam', comment: 'brightness unit' },
    { keyword: 'TELESCOP', value: 'AWS-L', comment: 'Aster Wide Survey array' },
  ],
  originalAxes: [2048, 1024],
};

const owner = makeUser({ id: 1 });

describe('ImageLibraryPage', () => {
  it('lists the images with dimensions, unit, beam, pixel scale, noise, size', async () => {
    const api = mockLibraryApi({ 'GET /api/projects/:id/images': { body: [counts, mosaic] } });
    await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    const text = pageText();
    expect(text).toContain('LDF 1.4 GHz mosaic');
    expect(text).toContain('2048 × 1024');
    expect(text).toContain('6″ × 4.5″, 30°');
    expect(text).toContain('1.5″');
    expect(text).toContain('0.000123 ± 1.0e-7 Jy/beam');
    expect(text).toContain('LDF X-ray counts');
    expect(api.callsTo('GET /api/projects/:id/images')[0]?.params.id).toBe('7');
    api.expectNoUnexpectedCalls();
  });

  it('searches by words in name, file name and unit', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [counts, mosaic] } });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await wrapper.get('input[data-test="image-search"]').setValue('count');
    const rows = wrapper.findAll('[data-test="image-table"] tbody tr').map((row) => row.text());
    expect(rows.length).toBe(1);
    expect(rows[0]).toContain('LDF X-ray counts');
  });

  it('opens the details with the WCS summary and searchable header cards', async () => {
    mockLibraryApi({
      'GET /api/projects/:id/images': { body: [mosaic] },
      'GET /api/images/:id': { body: mosaicDetail },
    });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await wrapper.get('[data-test="image-table"] tbody tr a').trigger('click');
    await settle();
    const wcs = wrapper.get('[data-test="wcs-summary"]').text();
    expect(wcs).toContain('SIN');
    expect(wcs).toContain('ICRS');
    expect(wcs).toContain('1024.5, 512.5');
    expect(wrapper.get('[data-test="header-cards"]').text()).toContain('TELESCOP');
    await wrapper.get('input[data-test="card-search"]').setValue('brightness');
    const cards = wrapper.get('[data-test="header-cards"]').text();
    expect(cards).toContain('BUNIT');
    expect(cards).not.toContain('TELESCOP');
  });

  it('renames, and puts the old name back with the server message when refused', async () => {
    const api = mockLibraryApi({
      'GET /api/projects/:id/images': { body: [mosaic] },
      'GET /api/images/:id': { body: mosaicDetail },
      'PATCH /api/images/:id': apiError(403, 'forbidden', 'Viewers of a project cannot rename its images.'),
    });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await wrapper.get('[data-test="image-table"] tbody tr a').trigger('click');
    await settle();
    await wrapper.get('input[data-test="rename"]').setValue('LDF L-band');
    await wrapper.get('[data-test="image-detail"] form').trigger('submit');
    await settle();
    expect(api.callsTo('PATCH /api/images/:id')[0]?.body).toEqual({ name: 'LDF L-band' });
    expect(notifications().join(' ')).toContain('Viewers of a project cannot rename its images.');
    expect(wrapper.get('[data-test="image-table"]').text()).toContain('LDF 1.4 GHz mosaic');
  });

  it('deletes after the name is typed again', async () => {
    const api = mockLibraryApi({
      'GET /api/projects/:id/images': { body: [mosaic, counts] },
      'GET /api/images/:id': { body: mosaicDetail },
      'DELETE /api/images/:id': { status: 204 },
    });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    // Newest first: the counts image is row 1, the mosaic row 2.
    const link = wrapper
      .findAll('[data-test="image-table"] tbody tr a')
      .find((a) => a.text() === 'LDF 1.4 GHz mosaic');
    await link!.trigger('click');
    await settle();
    await wrapper.get('[data-test="delete-image"]').trigger('click');
    await settle();
    const input = document.querySelector<HTMLInputElement>(
      '[data-test="confirm-name"] input, input[data-test="confirm-name"]',
    )!;
    input.value = 'LDF 1.4 GHz mosaic';
    input.dispatchEvent(new Event('input'));
    await settle();
    document.querySelector<HTMLButtonElement>('[data-test="confirm-delete"]')!.click();
    await settle();
    expect(api.callsTo('DELETE /api/images/:id')[0]?.params.id).toBe('11');
    expect(wrapper.get('[data-test="image-table"]').text()).not.toContain('LDF 1.4 GHz mosaic');
    expect(wrapper.get('[data-test="image-table"]').text()).toContain('LDF X-ray counts');
  });

  it('shows the empty state and the load error with a retry', async () => {
    mockLibraryApi({ 'GET /api/projects/:id/images': { body: [] } });
    await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    expect(pageText()).toContain('No images in this project yet.');
    unmountAll();
    mockLibraryApi({
      'GET /api/projects/:id/images': apiError(404, 'not_found', 'Project 7 does not exist.'),
    });
    await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    expect(pageText()).toContain('Project 7 does not exist.');
    expect(pageText()).toContain('Try again');
  });
});
