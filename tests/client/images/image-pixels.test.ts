import { afterEach, describe, expect, it, vi } from 'vitest';

import type { ImageDetail, PixelView } from '@shared/images';
import { createApiClient } from '@/boot/api';
import SkyViewer from '@/components/viewer/SkyViewer.vue';
import ImageLibraryPage from '@/pages/ImageLibraryPage.vue';
import type { PixelToWorld } from '@/viewer/wcs-readout';
import { makeUser } from '../support/fixtures';
import { mountPage, settle, unmountAll } from '../support/mount';
import { makeImage, mockLibraryApi, type PixelHandler } from './library-support';

afterEach(unmountAll);

const owner = makeUser({ id: 1 });
const mosaic = makeImage();
// A celestial TAN header of the invented Lyra Deep Field mosaic.
const mosaicDetail: ImageDetail = {
  ...mosaic,
  header: [
    { keyword: 'SIMPLE', value: true },
    { keyword: 'NAXIS', value: 2 },
    { keyword: 'NAXIS1', value: 2048 },
    { keyword: 'NAXIS2', value: 1024 },
    { keyword: 'CTYPE1', value: 'RA---TAN' },
    { keyword: 'CTYPE2', value: 'DEC--TAN' },
    { keyword: 'CRPIX1', value: 1024.5 },
    { keyword: 'CRPIX2', value: 512.5 },
    { keyword: 'CRVAL1', value: 277.5 },
    { keyword: 'CRVAL2', value: 36.2 },
    { keyword: 'CDELT1', value: -1.5 / 3600 },
    { keyword: 'CDELT2', value: 1.5 / 3600 },
    { keyword: 'BUNIT', value: 'Jy/beam' },
  ],
  originalAxes: [2048, 1024],
};

// A 4 × 2 view of the 2048 × 1024 image (block factor 512); the values are the view pixel indices.
const view: PixelView = {
  width: 4,
  height: 2,
  factor: 512,
  sourceWidth: 2048,
  sourceHeight: 1024,
  blankPixels: 1,
  data: Float32Array.from([0, 1, 2, 3, 4, 5, 6, Number.NaN]),
};

async function openDetail(pixels: PixelHandler) {
  const api = mockLibraryApi(
    { 'GET /api/projects/:id/images': { body: [mosaic] }, 'GET /api/images/:id': { body: mosaicDetail } },
    { pixels },
  );
  const mounted = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
  await mounted.wrapper.get('[data-test="image-table"] tbody tr a').trigger('click');
  await settle();
  await settle();
  return { ...mounted, api };
}

describe('Pixels in the detail panel', () => {
  it('loads the binary pixel view at 1024 px and shows it in the sky viewer with RA/Dec and scale', async () => {
    const { wrapper, api } = await openDetail(() => ({ view }));
    expect(api.pixelCalls).toHaveLength(1);
    expect(api.pixelCalls[0]?.imageId).toBe('11');
    expect(api.pixelCalls[0]?.query.get('maxSize')).toBe('1024');

    const viewer = wrapper.getComponent(SkyViewer);
    const plane = viewer.props('plane') as PixelView;
    expect([plane.width, plane.height, plane.factor, plane.sourceWidth]).toEqual([4, 2, 512, 2048]);
    expect([...plane.data.slice(0, 7)]).toEqual([0, 1, 2, 3, 4, 5, 6]);
    expect(Number.isNaN(plane.data[7])).toBe(true);
    expect(viewer.props('unit')).toBe('Jy/beam');
    // |CDELT1 · CDELT2|^½ in arcsec.
    expect(viewer.props('pixelScaleArcsec')).toBeCloseTo(1.5, 12);
    // By the definition of the FITS WCS (Calabretta & Greisen 2002, FITS WCS paper II), the reference pixel
    // of a zenithal projection maps to the reference point (CRVAL1, CRVAL2).
    const toWorld = viewer.props('pixelToWorld') as PixelToWorld;
    const world = toWorld(1024.5, 512.5);
    expect(world?.lon).toBeCloseTo(277.5, 9);
    expect(world?.lat).toBeCloseTo(36.2, 9);
    expect(wrapper.get('[data-test="pixel-view-note"]').text()).toContain('512 × 512 image pixels');
    api.expectNoUnexpectedCalls();
  });

  it('shows the server message when the pixels cannot be read, and tries again', async () => {
    let attempts = 0;
    const { wrapper, api } = await openDetail(() =>
      ++attempts === 1
        ? { status: 404, error: { code: 'not_found', message: 'Image 11 does not exist.' } }
        : { view },
    );
    const panel = wrapper.get('[data-test="pixel-panel"]');
    expect(panel.get('[role="alert"]').text()).toContain('Image 11 does not exist.');
    expect(wrapper.findComponent(SkyViewer).exists()).toBe(false);
    await panel
      .findAll('button')
      .find((button) => button.text().includes('Try again'))!
      .trigger('click');
    await settle();
    expect(api.pixelCalls).toHaveLength(2);
    expect(wrapper.findComponent(SkyViewer).exists()).toBe(true);
  });

  it('shows a loading state until the bytes arrive', async () => {
    let release: () => void = () => undefined;
    const gate = new Promise<void>((resolve) => (release = resolve));
    const api = mockLibraryApi(
      { 'GET /api/projects/:id/images': { body: [mosaic] }, 'GET /api/images/:id': { body: mosaicDetail } },
      { pixels: () => ({ view }) },
    );
    const pixelFetch = globalThis.fetch;
    vi.stubGlobal('fetch', async (input: string, init?: RequestInit) => {
      if (String(input).includes('/pixels')) await gate;
      return pixelFetch(input, init);
    });
    const { wrapper } = await mountPage(ImageLibraryPage, { path: '/projects/7/images', user: owner });
    await wrapper.get('[data-test="image-table"] tbody tr a').trigger('click');
    await settle();
    expect(wrapper.get('[data-test="pixel-panel"] [role="status"]').text()).toContain('Loading the pixels');
    release();
    await settle();
    await settle();
    expect(wrapper.findComponent(SkyViewer).exists()).toBe(true);
    api.expectNoUnexpectedCalls();
  });
});

describe('api.images.pixels', () => {
  it('decodes the view and reuses it when the server answers 304 to its ETag', async () => {
    const api = mockLibraryApi(
      {},
      {
        pixels: (call) =>
          call.headers['if-none-match'] === '"v1"' ? { status: 304 } : { view, etag: '"v1"' },
      },
    );
    const client = createApiClient();
    const first = await client.images.pixels(11, 256);
    const second = await client.images.pixels(11, 256);
    expect(api.pixelCalls.map((call) => call.headers['if-none-match'])).toEqual([undefined, '"v1"']);
    expect(api.pixelCalls[0]?.headers.accept).toBe('application/octet-stream');
    expect(second).toBe(first);
    expect([...first.data.slice(0, 7)]).toEqual([0, 1, 2, 3, 4, 5, 6]);
  });

  it('refuses bytes that are not a pixel view with a readable message', async () => {
    mockLibraryApi({}, { pixels: () => ({ view: { ...view, width: 5 } }) });
    await expect(createApiClient().images.pixels(11)).rejects.toThrow(
      "The server's pixel view could not be read (Pixel view: 64 bytes do not match 5×2 pixels.)",
    );
  });
});
