import { afterEach, describe, expect, it } from 'vitest';

import ImageLibraryPage from '@/pages/ImageLibraryPage.vue';
import { makeUser } from '../support/fixtures';
import { mountPage, settle, unmountAll } from '../support/mount';
import { mockLibraryApi } from '../images/library-support';
import { makeImageDetail } from './runs-support';

afterEach(unmountAll);

const detail = makeImageDetail();

async function openDetails(role: 'owner' | 'viewer') {
  const api = mockLibraryApi(
    { 'GET /api/projects/:id/images': { body: [detail] }, 'GET /api/images/:id': { body: detail } },
    {
      role,
      pixels: () => ({
        view: {
          width: 4,
          height: 4,
          factor: 16,
          sourceWidth: 64,
          sourceHeight: 48,
          blankPixels: 0,
          data: new Float32Array(16),
        },
      }),
    },
  );
  const mounted = await mountPage(ImageLibraryPage, {
    path: '/projects/7/images',
    user: makeUser({ id: 1 }),
  });
  await mounted.wrapper.get('[data-test="image-table"] tbody tr a').trigger('click');
  await settle();
  return { api, ...mounted };
}

describe('New run from the image library', () => {
  it('leads an owner from the image details to the run setup of that image', async () => {
    const { wrapper, router, api } = await openDetails('owner');
    await wrapper.get('[data-test="new-run"]').trigger('click');
    await settle();
    expect(router.currentRoute.value.name).toBe('run-setup');
    expect(router.currentRoute.value.fullPath).toBe(`/images/${detail.id}/runs/new`);
    api.expectNoUnexpectedCalls();
  });

  it('is not offered to a viewer', async () => {
    const { wrapper } = await openDetails('viewer');
    expect(wrapper.find('[data-test="image-detail"]').exists()).toBe(true);
    expect(wrapper.find('[data-test="new-run"]').exists()).toBe(false);
  });
});
