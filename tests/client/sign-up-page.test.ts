import { afterEach, describe, expect, it } from 'vitest';

import SignUpPage from '@/pages/SignUpPage.vue';
import { apiError, mockApi } from './support/api-mock';
import { makeUser } from './support/fixtures';
import { mountPage, notifications, settle, unmountAll } from './support/mount';

afterEach(unmountAll);

const config = (registrationOpen: boolean) => ({
  body: { registrationOpen, version: '0.1.0', devMail: true, passwordMinLength: 10 },
});
const preview = {
  email: 'tomas@example.org',
  projectName: 'Lyra Deep Field',
  invitedBy: 'Vega Lindqvist',
  role: 'viewer',
  expiresAt: '2026-03-08T10:00:00.000Z',
};

async function fillAndSubmit(wrapper: Awaited<ReturnType<typeof mountPage>>['wrapper'], email?: string) {
  if (email !== undefined) await wrapper.find('input[aria-label="E-mail address"]').setValue(email);
  await wrapper.find('input[aria-label="Display name"]').setValue('Tomas Verhoeven');
  await wrapper.find('input[aria-label="Password"]').setValue('long enough pass');
  await wrapper.find('input[aria-label="Repeat password"]').setValue('long enough pass');
  await wrapper.find('form').trigger('submit');
  await settle();
}

describe('SignUpPage', () => {
  it('joins through an invitation: shows who invited, fixes the address and sends the token', async () => {
    const api = mockApi({
      'GET /api/config/public': config(false),
      'GET /api/auth/invitations/:token': { body: preview },
      'POST /api/auth/signup': { status: 201, body: { user: makeUser({ email: preview.email }) } },
    });
    const { wrapper, router } = await mountPage(SignUpPage, { path: '/signup?invitation=tok-123' });
    expect(wrapper.find('[data-test="invitation-banner"]').text()).toMatch(
      /Vega Lindqvist invited you to Lyra Deep Field as\s+viewer/,
    );
    const email = wrapper.find('input[aria-label="E-mail address"]');
    expect((email.element as HTMLInputElement).value).toBe('tomas@example.org');
    expect(email.attributes('readonly')).toBeDefined();

    await fillAndSubmit(wrapper);
    expect(api.callsTo('POST /api/auth/signup')[0]?.body).toEqual({
      email: 'tomas@example.org',
      displayName: 'Tomas Verhoeven',
      password: 'long enough pass',
      invitation: 'tok-123',
    });
    expect(router.currentRoute.value.name).toBe('projects');
    api.expectNoUnexpectedCalls();
  });

  it('says so when registration is closed and there is no invitation', async () => {
    mockApi({ 'GET /api/config/public': config(false) });
    const { wrapper } = await mountPage(SignUpPage, { path: '/signup' });
    expect(wrapper.find('[role="alert"]').text()).toContain('by invitation only');
    expect(wrapper.find('form').exists()).toBe(false);
  });

  it("shows the server's reason when the address is taken", async () => {
    mockApi({
      'GET /api/config/public': config(true),
      'POST /api/auth/signup': apiError(409, 'conflict', 'An account with this e-mail address exists.'),
    });
    const { wrapper, router } = await mountPage(SignUpPage, { path: '/signup' });
    await fillAndSubmit(wrapper, 'vega@aws.example');
    expect(notifications().join(' ')).toContain('An account with this e-mail address exists.');
    expect(router.currentRoute.value.name).toBe('sign-up');
  });

  it('refuses a short password before asking the server', async () => {
    const api = mockApi({ 'GET /api/config/public': config(true) });
    const { wrapper } = await mountPage(SignUpPage, { path: '/signup' });
    await wrapper.find('input[aria-label="E-mail address"]').setValue('tomas@example.org');
    await wrapper.find('input[aria-label="Display name"]').setValue('Tomas');
    await wrapper.find('input[aria-label="Password"]').setValue('short');
    await wrapper.find('input[aria-label="Repeat password"]').setValue('short');
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(wrapper.text()).toContain('Use at least 10 characters.');
    expect(api.callsTo('POST /api/auth/signup')).toHaveLength(0);
    api.expectNoUnexpectedCalls();
  });
});
