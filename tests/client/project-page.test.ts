import { afterEach, describe, expect, it } from 'vitest';

import ProjectPage from '@/pages/ProjectPage.vue';
import { useProjectsStore } from '@/stores/projects';
import { apiError, mockApi } from './support/api-mock';
import { makeMember, makeProjectDetail, makeUser } from './support/fixtures';
import { mountPage, notifications, pageText, settle, unmountAll } from './support/mount';

afterEach(unmountAll);

const owner = makeUser({ id: 1 });
const colleague = makeMember({
  userId: 2,
  email: 'orrin@aws.example',
  displayName: 'Orrin Castellanos',
  role: 'editor',
});
const detail = makeProjectDetail({
  id: 7,
  name: 'Lyra Deep Field',
  members: [makeMember(), colleague],
  memberCount: 2,
});

function ownerRoutes(extra = {}) {
  return {
    'GET /api/projects/:id': { body: detail },
    'GET /api/projects/:id/invitations': { body: [] },
    ...extra,
  };
}

describe('ProjectPage', () => {
  it('lists the members with their roles', async () => {
    const api = mockApi(ownerRoutes());
    await mountPage(ProjectPage, { path: '/projects/7', user: owner });
    const text = pageText();
    expect(text).toContain('Lyra Deep Field');
    expect(text).toContain('Orrin Castellanos');
    expect(text).toContain('orrin@aws.example');
    expect(api.callsTo('GET /api/projects/:id')[0]?.params.id).toBe('7');
    api.expectNoUnexpectedCalls();
  });

  it('a viewer sees no member management and does not ask for invitations', async () => {
    const api = mockApi({ 'GET /api/projects/:id': { body: { ...detail, myRole: 'viewer' } } });
    const { wrapper } = await mountPage(ProjectPage, { path: '/projects/7', user: makeUser({ id: 2 }) });
    expect(wrapper.find('[data-test="invite-email"]').exists()).toBe(false);
    expect(wrapper.find('[data-test="delete-project"]').exists()).toBe(false);
    expect(wrapper.find('[data-test="leave"]').exists()).toBe(true);
    api.expectNoUnexpectedCalls();
  });

  it('deletes only after the exact name is typed, and sends it as confirmation', async () => {
    const api = mockApi(ownerRoutes({ 'DELETE /api/projects/:id': { status: 204 } }));
    const { wrapper, router } = await mountPage(ProjectPage, { path: '/projects/7', user: owner });
    await wrapper.find('[data-test="delete-project"]').trigger('click');
    await settle();

    const input = document.querySelector<HTMLInputElement>(
      '[data-test="confirm-name"] input, input[data-test="confirm-name"]',
    );
    const confirm = () => document.querySelector<HTMLButtonElement>('[data-test="confirm-delete"]');
    expect(input).not.toBeNull();
    expect(confirm()?.disabled ?? confirm()?.getAttribute('aria-disabled') === 'true').toBeTruthy();

    input!.value = 'Lyra Deep';
    input!.dispatchEvent(new Event('input'));
    await settle();
    expect(confirm()?.getAttribute('aria-disabled')).toBe('true');

    input!.value = 'Lyra Deep Field';
    input!.dispatchEvent(new Event('input'));
    await settle();
    expect(confirm()?.getAttribute('aria-disabled')).toBeNull();
    confirm()!.closest('form')!.dispatchEvent(new Event('submit'));
    await settle();

    expect(api.callsTo('DELETE /api/projects/:id').map((call) => call.body)).toEqual([
      { confirmName: 'Lyra Deep Field' },
    ]);
    expect(router.currentRoute.value.name).toBe('projects');
    api.expectNoUnexpectedCalls();
  });

  it('rolls a refused role change back and shows why', async () => {
    const api = mockApi(
      ownerRoutes({
        'PATCH /api/projects/:id/members/:userId': apiError(
          409,
          'conflict',
          'A project needs at least one owner.',
        ),
      }),
    );
    const { pinia } = await mountPage(ProjectPage, { path: '/projects/7', user: owner });
    const store = useProjectsStore(pinia);

    const pending = store.changeRole(7, 1, 'viewer');
    expect(store.current?.members.find((member) => member.userId === 1)?.role).toBe('viewer'); // optimistic
    expect(await pending).toBe(false);
    await settle();

    expect(store.current?.members.find((member) => member.userId === 1)?.role).toBe('owner');
    expect(notifications().join(' ')).toContain('A project needs at least one owner.');
    expect(api.callsTo('PATCH /api/projects/:id/members/:userId')[0]?.body).toEqual({ role: 'viewer' });
  });

  it('an unknown address gets an invitation, which then appears in the open invitations', async () => {
    const invitation = {
      id: 3,
      projectId: 7,
      email: 'new.colleague@example.org',
      role: 'viewer',
      invitedById: 1,
      createdAt: '2026-03-01T10:00:00.000Z',
      expiresAt: '2026-03-08T10:00:00.000Z',
    };
    const api = mockApi(
      ownerRoutes({ 'POST /api/projects/:id/members': { status: 202, body: { invitation } } }),
    );
    const { wrapper } = await mountPage(ProjectPage, { path: '/projects/7', user: owner });

    await wrapper
      .find('[data-test="invite-email"] input, input[data-test="invite-email"]')
      .setValue('new.colleague@example.org');
    await wrapper.find('form[aria-label="Add a member"]').trigger('submit');
    await settle();

    expect(api.callsTo('POST /api/projects/:id/members')[0]?.body).toEqual({
      email: 'new.colleague@example.org',
      role: 'viewer',
    });
    expect(wrapper.find('[data-test="invitation-list"]').text()).toContain('new.colleague@example.org');
    expect(notifications().join(' ')).toContain('invitation to sign up was e-mailed');
    api.expectNoUnexpectedCalls();
  });

  it('shows the error and a retry when the project cannot be loaded', async () => {
    mockApi({ 'GET /api/projects/:id': apiError(404, 'not_found', 'No such project.') });
    await mountPage(ProjectPage, { path: '/projects/7', user: owner });
    expect(document.querySelector('[role="alert"]')?.textContent).toContain('No such project.');
    expect(pageText()).toContain('Try again');
  });
});
