import { afterEach, describe, expect, it } from 'vitest';

import AdminAuditPage from '@/pages/AdminAuditPage.vue';
import AdminMailPage from '@/pages/AdminMailPage.vue';
import AdminUsersPage from '@/pages/AdminUsersPage.vue';
import { useAdminStore } from '@/stores/admin';
import { apiError, mockApi } from './support/api-mock';
import { makeAdminUser, makeUser } from './support/fixtures';
import { mountPage, notifications, settle, unmountAll } from './support/mount';

afterEach(unmountAll);

const me = makeUser({ id: 1, role: 'admin' });
const orrin = makeAdminUser({
  id: 2,
  email: 'orrin@aws.example',
  displayName: 'Orrin Castellanos',
  quotaBytes: 4 * 1024 ** 3,
  bytesUsed: 1024 ** 3,
});

describe('AdminUsersPage', () => {
  it('shows usage against quota and disables an account', async () => {
    const api = mockApi({
      'GET /api/admin/users': { body: [makeAdminUser({ ...me, projectCount: 2 }), orrin] },
      'PATCH /api/admin/users/:id': (request) => ({ body: { ...orrin, ...(request.body as object) } }),
    });
    const { wrapper, pinia } = await mountPage(AdminUsersPage, { path: '/admin/users', user: me });
    expect(wrapper.text()).toContain('1.00 GiB of 4.00 GiB (25 %)');

    await wrapper.find('[aria-label="Orrin Castellanos can sign in"]').trigger('click');
    await settle();
    expect(api.callsTo('PATCH /api/admin/users/:id')).toEqual([
      expect.objectContaining({ params: { id: '2' }, body: { disabled: true } }),
    ]);
    expect(useAdminStore(pinia).users.find((user) => user.id === 2)?.disabled).toBe(true);
    api.expectNoUnexpectedCalls();
  });

  it('rolls a refused change back', async () => {
    mockApi({
      'GET /api/admin/users': { body: [orrin] },
      'PATCH /api/admin/users/:id': apiError(
        400,
        'bad_request',
        'The quota is below what the user already stores.',
      ),
    });
    const { pinia } = await mountPage(AdminUsersPage, { path: '/admin/users', user: me });
    const admin = useAdminStore(pinia);
    expect(await admin.updateUser(2, { quotaBytes: 10 })).toBe(false);
    await settle();
    expect(admin.users[0]?.quotaBytes).toBe(4 * 1024 ** 3);
    expect(notifications().join(' ')).toContain('The quota is below what the user already stores.');
  });
});

describe('AdminAuditPage', () => {
  it('asks the server for a page of events and shows them', async () => {
    const api = mockApi({
      'GET /api/admin/users': { body: [orrin] },
      'GET /api/admin/audit': (request) => ({
        body: {
          items: [
            {
              id: 9,
              action: 'auth.sign-in-failed',
              actorId: null,
              actorEmail: null,
              targetType: null,
              targetId: null,
              details: { email: 'someone@example.org' },
              ip: '127.0.0.1',
              createdAt: '2026-03-01T10:00:00.000Z',
            },
          ],
          total: 61,
          page: Number(request.query.get('page')),
          pageSize: Number(request.query.get('pageSize')),
        },
      }),
    });
    const { wrapper } = await mountPage(AdminAuditPage, { path: '/admin/audit', user: me });
    const [first] = api.callsTo('GET /api/admin/audit');
    expect([first?.query.get('page'), first?.query.get('pageSize'), first?.query.get('action')]).toEqual([
      '1',
      '25',
      null,
    ]);
    expect(wrapper.text()).toContain('auth.sign-in-failed');
    expect(wrapper.text()).toContain('email: someone@example.org');
    expect(wrapper.text()).toContain('1-25 of 61'.replace('-', '–'));
    api.expectNoUnexpectedCalls();
  });
});

describe('AdminMailPage', () => {
  it('lists messages and shows the chosen one as text with working links', async () => {
    const summary = {
      id: 5,
      to: 'new.colleague@example.org',
      from: 'Skysieve <no-reply@skysieve.local>',
      subject: 'You are invited to a Skysieve project',
      receivedAt: '2026-03-01T10:00:00.000Z',
    };
    const api = mockApi({
      'GET /api/config/public': {
        body: { registrationOpen: true, version: '0.1.0', devMail: true, passwordMinLength: 10 },
      },
      'GET /api/admin/mail': { body: [summary] },
      'GET /api/admin/mail/:id': {
        body: {
          ...summary,
          text: 'Join here: http://127.0.0.1:8080/signup?invitation=abc <b>bold</b>',
          html: '<b>x</b>',
        },
      },
    });
    const { wrapper } = await mountPage(AdminMailPage, { path: '/admin/mail/5', user: me });
    expect(wrapper.find('[data-test="mail-list"]').text()).toContain('You are invited to a Skysieve project');
    const body = wrapper.find('[data-test="mail-body"]');
    expect(body.find('a').attributes('href')).toBe('http://127.0.0.1:8080/signup?invitation=abc');
    expect(body.text()).toContain('<b>bold</b>'); // shown as text, never rendered as HTML
    expect(body.find('b').exists()).toBe(false);
    expect(api.callsTo('GET /api/admin/mail/:id')[0]?.params.id).toBe('5');
  });
});
