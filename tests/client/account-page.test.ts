import { afterEach, describe, expect, it } from 'vitest';

import AccountPage from '@/pages/AccountPage.vue';
import { useTokensStore } from '@/stores/tokens';
import { apiError, mockApi } from './support/api-mock';
import { makeUser } from './support/fixtures';
import { mountPage, notifications, settle, unmountAll } from './support/mount';

afterEach(unmountAll);

const config = { body: { registrationOpen: true, version: '0.1.0', devMail: true, passwordMinLength: 10 } };
const listed = {
  id: 4,
  name: 'nightly pipeline',
  prefix: 'sks_ab12',
  createdAt: '2026-03-01T10:00:00.000Z',
  lastUsedAt: null,
};

describe('AccountPage', () => {
  it('shows a new token once, with a copy button, and forgets it when dismissed', async () => {
    const api = mockApi({
      'GET /api/config/public': config,
      'GET /api/tokens': { body: [] },
      'POST /api/tokens': { status: 201, body: { ...listed, token: 'sks_ab12.secret-value' } },
    });
    const { wrapper } = await mountPage(AccountPage, { path: '/account', user: makeUser() });
    await wrapper
      .find('input[aria-label="Token name, e.g. reduction pipeline"]')
      .setValue('nightly pipeline');
    await wrapper.find('form[aria-label="New API token"]').trigger('submit');
    await settle();

    expect(api.callsTo('POST /api/tokens')[0]?.body).toEqual({ name: 'nightly pipeline' });
    const secret = wrapper.find('[data-test="token-secret"]');
    expect(secret.text()).toContain('sks_ab12.secret-value');
    expect(secret.text()).toContain('shown only once');
    expect(secret.find('button[aria-label], button').exists()).toBe(true);
    expect(wrapper.find('[data-test="token-list"]').text()).toContain('nightly pipeline');

    const done = secret.findAll('button').find((button) => button.text().includes('Done'));
    await done!.trigger('click');
    expect(wrapper.find('[data-test="token-secret"]').exists()).toBe(false);
    expect(wrapper.text()).not.toContain('secret-value');
    api.expectNoUnexpectedCalls();
  });

  it('puts a token back in the list when revoking fails', async () => {
    mockApi({
      'GET /api/config/public': config,
      'GET /api/tokens': { body: [listed] },
      'DELETE /api/tokens/:id': apiError(404, 'not_found', 'No such token.'),
    });
    const { pinia } = await mountPage(AccountPage, { path: '/account', user: makeUser() });
    const tokens = useTokensStore(pinia);
    const pending = tokens.revokeToken(4);
    expect(tokens.tokens).toEqual([]); // optimistic
    expect(await pending).toBe(false);
    await settle();
    expect(tokens.tokens.map((token) => token.name)).toEqual(['nightly pipeline']);
    expect(notifications().join(' ')).toContain('No such token.');
  });

  it("shows the server's refusal of a password change", async () => {
    const api = mockApi({
      'GET /api/config/public': config,
      'GET /api/tokens': { body: [] },
      'POST /api/auth/password': apiError(400, 'bad_request', 'The current password is not right.'),
    });
    const { wrapper } = await mountPage(AccountPage, { path: '/account', user: makeUser() });
    await wrapper.find('input[aria-label="Current password"]').setValue('old one');
    await wrapper.find('input[aria-label="New password"]').setValue('a much longer one');
    await wrapper.find('input[aria-label="Repeat new password"]').setValue('a much longer one');
    await wrapper.find('form[aria-labelledby="password-title"]').trigger('submit');
    await settle();
    expect(api.callsTo('POST /api/auth/password')[0]?.body).toEqual({
      currentPassword: 'old one',
      newPassword: 'a much longer one',
    });
    expect(notifications().join(' ')).toContain('The current password is not right.');
  });
});
