import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createApp } from 'vue';
import { Notify, Quasar } from 'quasar';
import { createPinia, setActivePinia } from 'pinia';
import { createMemoryHistory } from 'vue-router';

import { createAppRouter } from '@/router';
import { safeRedirect } from '@/router/redirect';
import { useAuthStore } from '@/stores/auth';
import { mockApi } from './support/api-mock';
import { makeUser } from './support/fixtures';

// The guard reports refusals through the notify helper, which needs Quasar's Notify installed.
beforeAll(() => {
  createApp({}).use(Quasar, { plugins: { Notify } });
});
afterEach(() => setActivePinia(undefined));

describe('route guards', () => {
  it('sends a signed-out visitor to sign-in and remembers where they were going', async () => {
    setActivePinia(createPinia());
    const api = mockApi({ 'GET /api/auth/session': { body: { user: null } } });
    const router = createAppRouter(createMemoryHistory());
    await router.push('/projects/7');
    expect(router.currentRoute.value.name).toBe('sign-in');
    expect(router.currentRoute.value.query.redirect).toBe('/projects/7');
    expect(api.callsTo('GET /api/auth/session')).toHaveLength(1);
    api.expectNoUnexpectedCalls();
  });

  it('keeps members out of the admin area', async () => {
    setActivePinia(createPinia());
    mockApi({ 'GET /api/auth/session': { body: { user: makeUser({ role: 'member' }) } } });
    const router = createAppRouter(createMemoryHistory());
    await router.push('/admin/users');
    expect(router.currentRoute.value.name).toBe('projects');
    expect(document.querySelector('.q-notification')?.textContent).toContain('for administrators only');
  });

  it('lets administrators into the admin area and asks the server only once who is signed in', async () => {
    setActivePinia(createPinia());
    const api = mockApi({ 'GET /api/auth/session': { body: { user: makeUser({ role: 'admin' }) } } });
    const router = createAppRouter(createMemoryHistory());
    await router.push('/admin/audit');
    expect(router.currentRoute.value.name).toBe('admin-audit');
    await router.push('/admin/mail/3');
    expect(router.currentRoute.value.params.mailId).toBe('3');
    expect(api.callsTo('GET /api/auth/session')).toHaveLength(1);
  });

  it('sends a signed-in user away from the sign-in page', async () => {
    setActivePinia(createPinia());
    mockApi({});
    useAuthStore().$patch({ user: makeUser(), checked: true });
    const router = createAppRouter(createMemoryHistory());
    await router.push('/signin');
    expect(router.currentRoute.value.name).toBe('projects');
  });

  it('answers unknown addresses with the not-found page', async () => {
    setActivePinia(createPinia());
    mockApi({});
    useAuthStore().$patch({ user: makeUser(), checked: true });
    const router = createAppRouter(createMemoryHistory());
    await router.push('/no/such/page');
    expect(router.currentRoute.value.name).toBe('not-found');
  });
});

describe('safeRedirect', () => {
  it('accepts paths inside the app only', () => {
    expect(safeRedirect('/projects/3?tab=members')).toBe('/projects/3?tab=members');
    expect(safeRedirect('//evil.example')).toBeNull();
    expect(safeRedirect('/\\evil.example')).toBeNull();
    expect(safeRedirect('https://evil.example')).toBeNull();
    expect(safeRedirect(['/a'])).toBeNull();
  });
});
