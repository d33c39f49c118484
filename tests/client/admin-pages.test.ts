import { afterEach, describe, expect, it } from 'vitest';

import AdminAuditPage from '@/pages/AdminAuditPage.vue';
import AdminMailPage from '@/pages/AdminMailPage.vue';
import AdminStoragePage from '@/pages/AdminStoragePage.vue';
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
    // The shared page header: the title and a Refresh that asks the server again.
    const header = wrapper.get('[data-test="admin-page-header"]');
    expect(header.get('h1').text()).toBe('Users');
    await header.get('[data-test="refresh"]').trigger('click');
    await settle();
    expect(api.callsTo('GET /api/admin/users')).toHaveLength(2);
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
    expect(wrapper.get('[data-test="admin-page-header"] h1').text()).toBe('Audit log');
    await wrapper.get('[data-test="admin-page-header"] [data-test="refresh"]').trigger('click');
    await settle();
    expect(api.callsTo('GET /api/admin/audit')).toHaveLength(2);
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
    expect(wrapper.get('[data-test="admin-page-header"] h1').text()).toBe('Mail inbox');
    await wrapper.get('[data-test="admin-page-header"] [data-test="refresh"]').trigger('click');
    await settle();
    expect(api.callsTo('GET /api/admin/mail')).toHaveLength(2);
  });
});

describe('AdminStoragePage', () => {
  const GiB = 1024 ** 3;
  const usage = {
    users: [
      {
        userId: 2,
        email: 'orrin@aws.example',
        displayName: 'Orrin Castellanos',
        quotaBytes: 4 * GiB,
        bytesUsed: Math.round(3.6 * GiB),
        imageCount: 12,
        imageBytes: 2 * GiB,
      },
      {
        userId: 3,
        email: 'mira@aws.example',
        displayName: 'Mira Okafor',
        quotaBytes: 4 * GiB,
        bytesUsed: GiB,
        imageCount: 3,
        imageBytes: Math.round(0.5 * GiB),
      },
    ],
    projects: [
      {
        projectId: 7,
        name: 'Lyra Deep Field',
        ownerId: 2,
        ownerEmail: 'orrin@aws.example',
        ownerName: 'Orrin Castellanos',
        imageCount: 12,
        imageBytes: 2 * GiB,
        runCount: 5,
        runBytes: Math.round(1.6 * GiB),
      },
      {
        projectId: 9,
        name: 'Aster calibration tiles',
        ownerId: null,
        ownerEmail: null,
        ownerName: null,
        imageCount: 3,
        imageBytes: Math.round(0.5 * GiB),
        runCount: 40,
        runBytes: Math.round(0.25 * GiB),
      },
    ],
    totals: { bytesUsed: Math.round(4.6 * GiB), quotaBytes: 8 * GiB },
  };

  it('shows usage bars per account and sorts the projects by any column', async () => {
    const api = mockApi({ 'GET /api/admin/storage': { body: usage } });
    const { wrapper } = await mountPage(AdminStoragePage, { path: '/admin/storage', user: me });
    expect(wrapper.get('[data-test="admin-page-header"] h1').text()).toBe('Storage');
    // 4.6 GiB of 8 GiB: 57.5 %, a hair under after rounding the bytes to whole numbers, so 57 %.
    expect(wrapper.get('[data-test="storage-totals"]').text()).toContain('4.60 GiB of 8.00 GiB (57 %)');
    expect(wrapper.get('[data-test="nearly-full"]').text()).toBe('1 account uses 80 % of the quota or more.');
    const accounts = wrapper.get('[data-test="storage-accounts"]');
    // Largest use first; each account's bar says used of quota.
    const accountRows = accounts.findAll('tbody tr').map((row) => row.text());
    expect(accountRows[0]).toContain('Orrin Castellanos');
    expect(accountRows[0]).toContain('3.60 GiB of 4.00 GiB (90 %)');
    expect(accounts.findAll('[role="meter"]').map((bar) => bar.attributes('aria-valuenow'))).toEqual([
      '90',
      '25',
    ]);

    const projects = wrapper.get('[data-test="storage-projects"]');
    const names = () => projects.findAll('tbody tr').map((row) => row.find('td').text());
    // Stored bytes (images + run results) descending: 3.6 GiB before 0.75 GiB.
    expect(names()).toEqual(['Lyra Deep Field', 'Aster calibration tiles']);
    expect(projects.text()).toContain('no owner (account deleted)');
    expect(projects.text()).toContain('3.60 GiB');
    const runsHeader = projects.findAll('thead th').find((th) => th.text().includes('Runs'))!;
    await runsHeader.trigger('click');
    await settle();
    expect(names()).toEqual(['Lyra Deep Field', 'Aster calibration tiles']);
    await runsHeader.trigger('click');
    await settle();
    expect(names()).toEqual(['Aster calibration tiles', 'Lyra Deep Field']);

    // The search matches the project's name or its owner.
    await projects.get('input').setValue('orrin');
    await settle();
    expect(names()).toEqual(['Lyra Deep Field']);
    await projects.get('input').setValue('calibration');
    await settle();
    expect(names()).toEqual(['Aster calibration tiles']);

    await wrapper.get('[data-test="admin-page-header"] [data-test="refresh"]').trigger('click');
    await settle();
    expect(api.callsTo('GET /api/admin/storage')).toHaveLength(2);
    api.expectNoUnexpectedCalls();
  });

  it('shows the server message when storage cannot be read', async () => {
    mockApi({ 'GET /api/admin/storage': apiError(500, 'internal', 'The database is not reachable.') });
    await mountPage(AdminStoragePage, { path: '/admin/storage', user: me });
    expect(notifications().join(' ')).toContain('The database is not reachable.');
  });
});
