import { afterEach, describe, expect, it } from 'vitest';

import SignInPage from '@/pages/SignInPage.vue';
import { useAuthStore } from '@/stores/auth';
import { apiError, mockApi } from './support/api-mock';
import { makeUser } from './support/fixtures';
import { mountPage, notifications, settle, unmountAll } from './support/mount';

const config = { body: { registrationOpen: true, version: '0.1.0', devMail: true, passwordMinLength: 10 } };

afterEach(unmountAll);

describe('SignInPage', () => {
  it('signs in and goes back to the page that asked for it', async () => {
    const api = mockApi({
      'GET /api/config/public': config,
      'POST /api/auth/login': { body: { user: makeUser() } },
    });
    const { wrapper, router, pinia } = await mountPage(SignInPage, { path: '/signin?redirect=/account' });

    await wrapper.find('input[type="email"]').setValue('vega@aws.example');
    await wrapper.find('input[type="password"]').setValue('correct horse');
    await wrapper.find('form').trigger('submit');
    await settle();

    const [login] = api.callsTo('POST /api/auth/login');
    expect(login?.body).toEqual({ email: 'vega@aws.example', password: 'correct horse' });
    expect(login?.headers['x-csrf-token']).toBe('test-csrf-token');
    expect(useAuthStore(pinia).user?.displayName).toBe('Vega Lindqvist');
    expect(router.currentRoute.value.fullPath).toBe('/account');
    api.expectNoUnexpectedCalls();
  });

  it("shows the server's message when the password is wrong and stays on the page", async () => {
    const api = mockApi({
      'GET /api/config/public': config,
      'POST /api/auth/login': apiError(401, 'wrong_credentials', 'Wrong e-mail or password.'),
    });
    const { wrapper, router } = await mountPage(SignInPage, { path: '/signin' });

    await wrapper.find('input[type="email"]').setValue('vega@aws.example');
    await wrapper.find('input[type="password"]').setValue('not it');
    await wrapper.find('form').trigger('submit');
    await settle();

    expect(notifications().join(' ')).toContain('Wrong e-mail or password.');
    expect(router.currentRoute.value.name).toBe('sign-in');
    expect((wrapper.find('input[type="password"]').element as HTMLInputElement).value).toBe('');
    api.expectNoUnexpectedCalls();
  });

  it('clears the refusal once the next attempt succeeds', async () => {
    let attempt = 0;
    mockApi({
      'GET /api/config/public': config,
      'POST /api/auth/login': () =>
        ++attempt === 1
          ? apiError(401, 'wrong_credentials', 'Wrong e-mail or password.')
          : { body: { user: makeUser() } },
    });
    const { wrapper, router } = await mountPage(SignInPage, { path: '/signin' });
    await wrapper.find('input[type="email"]').setValue('vega@aws.example');
    await wrapper.find('input[type="password"]').setValue('not it');
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(notifications().join(' ')).toContain('Wrong e-mail or password.');

    await wrapper.find('input[type="password"]').setValue('correct horse');
    await wrapper.find('form').trigger('submit');
    await settle();
    await new Promise((resolve) => setTimeout(resolve, 400)); // the notification's leave transition
    expect(router.currentRoute.value.name).toBe('projects');
    expect(notifications().join(' ')).not.toContain('Wrong e-mail or password.');
  });

  it('never redirects to another site after sign-in', async () => {
    mockApi({ 'GET /api/config/public': config, 'POST /api/auth/login': { body: { user: makeUser() } } });
    const { wrapper, router } = await mountPage(SignInPage, { path: '/signin?redirect=//evil.example/x' });
    await wrapper.find('input[type="email"]').setValue('vega@aws.example');
    await wrapper.find('input[type="password"]').setValue('correct horse');
    await wrapper.find('form').trigger('submit');
    await settle();
    expect(router.currentRoute.value.name).toBe('projects');
  });
});
