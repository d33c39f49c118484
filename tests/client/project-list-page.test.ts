import { afterEach, describe, expect, it } from 'vitest';

import ProjectListPage from '@/pages/ProjectListPage.vue';
import { mockApi } from './support/api-mock';
import { makeProject, makeUser } from './support/fixtures';
import { mountPage, pageText, settle, unmountAll } from './support/mount';

afterEach(unmountAll);

describe('ProjectListPage', () => {
  it('shows an empty state with a way to create the first project', async () => {
    const api = mockApi({ 'GET /api/projects': { body: [] } });
    const { wrapper } = await mountPage(ProjectListPage, { path: '/projects', user: makeUser() });
    expect(wrapper.find('[data-test="empty-state"]').text()).toContain('No projects yet');
    api.expectNoUnexpectedCalls();
  });

  it('lists projects with the role and member count, and filters them', async () => {
    mockApi({
      'GET /api/projects': {
        body: [
          makeProject({ id: 1, name: 'Lyra Deep Field', myRole: 'owner', memberCount: 3 }),
          makeProject({
            id: 2,
            name: 'Pilot tile',
            description: 'counts images',
            myRole: 'viewer',
            memberCount: 1,
          }),
        ],
      },
    });
    const { wrapper } = await mountPage(ProjectListPage, { path: '/projects', user: makeUser() });
    const cards = wrapper.findAll('[data-test="project-link"]');
    expect(cards.map((card) => card.text())).toEqual([
      expect.stringMatching(/Lyra Deep Field.*Owner.*3 members/),
      expect.stringMatching(/Pilot tile.*Viewer.*1 member(?!s)/),
    ]);
    await wrapper.find('input[aria-label="Filter by name or description"]').setValue('counts');
    expect(wrapper.findAll('[data-test="project-link"]').map((card) => card.text())).toEqual([
      expect.stringContaining('Pilot tile'),
    ]);
  });

  it('creates a project and opens it', async () => {
    const created = makeProject({ id: 12, name: 'Mosaic checks', description: '' });
    const api = mockApi({
      'GET /api/projects': { body: [] },
      'POST /api/projects': { status: 201, body: created },
    });
    const { wrapper, router } = await mountPage(ProjectListPage, { path: '/projects', user: makeUser() });
    await wrapper.find('[data-test="new-project"]').trigger('click');
    await settle();
    const name = document.querySelector<HTMLInputElement>('input[aria-label="Project name"]')!;
    name.value = '  Mosaic checks ';
    name.dispatchEvent(new Event('input'));
    await settle();
    name.closest('form')!.dispatchEvent(new Event('submit'));
    await settle();

    expect(api.callsTo('POST /api/projects')[0]?.body).toEqual({ name: 'Mosaic checks' });
    expect(router.currentRoute.value.fullPath).toBe('/projects/12');
    expect(pageText()).toContain('Mosaic checks');
    api.expectNoUnexpectedCalls();
  });

  it('asks for every project only when an administrator turns the switch on', async () => {
    const api = mockApi({ 'GET /api/projects': { body: [makeProject()] } });
    const { wrapper } = await mountPage(ProjectListPage, {
      path: '/projects',
      user: makeUser({ role: 'admin' }),
    });
    await wrapper.find('.q-toggle').trigger('click');
    await settle();
    expect(api.callsTo('GET /api/projects').map((call) => call.query.get('all'))).toEqual([null, 'true']);
  });
});
