/**
 * The foundation journey in a real browser (Debian's Chromium through playwright-core, headless) against
 * the real app: the client built with Vite's build() into a temp folder, the Express app from
 * server/app.ts on a free 127.0.0.1 port, its own migrated database (from `npm test`'s template) and the
 * development SMTP receiver, started by tests/e2e/support/browser-app.ts. Sign up, sign out, sign in, create a
 * project, invite a colleague by e-mail (the message must reach the fake mail service and show in the admin's
 * inbox), follow the invitation link as the colleague, sign out. A screenshot of each main page goes to
 * test-artifacts/. No console errors, except the 401 of the deliberately wrong password.
 */
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { createUser, mailTo } from '../support/test-app';
import {
  type BrowserApp,
  signIn as signInOn,
  signOut as signOutOf,
  startBrowserApp,
} from './support/browser-app';

const newUser = { email: 'ada.quill@aws.example', displayName: 'Ada Quill', password: 'lyra-deep-field-2' };
const admin = { email: 'root.admin@aws.example', password: 'admin-password-123' };
const colleague = 'tomas.verhoeven@example.org';
const projectName = 'Lyra Deep Field — tile 12';

let app: BrowserApp;
let page: Page;

const shot = (name: string) => app.shot(name);
const signIn = (email: string, password: string) => signInOn(page, email, password);
const signOut = () => signOutOf(page);

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'foundation' });
  page = app.page;
  await createUser(app.runtime.ctx, {
    email: admin.email,
    displayName: 'Root Admin',
    role: 'admin',
    password: admin.password,
  });
});

afterAll(async () => {
  await app?.close();
});

describe('foundation journey in the browser', () => {
  it('signs up, signs out and in, creates a project, invites a colleague by e-mail, signs out', async () => {
    // Sign up
    await page.goto(`${app.url}/signup`);
    await expect.poll(() => page.title()).toBe('Create an account · Skysieve');
    await page.getByRole('textbox', { name: 'E-mail address', exact: true }).fill(newUser.email);
    await page.getByRole('textbox', { name: 'Display name', exact: true }).fill(newUser.displayName);
    await page.getByRole('textbox', { name: 'Password', exact: true }).fill(newUser.password);
    await page.getByRole('textbox', { name: 'Repeat password', exact: true }).fill(newUser.password);
    await shot('01-sign-up');
    await page.getByRole('button', { name: 'Create account' }).click();
    await page.waitForURL(/\/projects$/);
    await expect.poll(() => page.getByTestId('user-name').textContent()).toBe(newUser.displayName);
    await expect.poll(() => page.getByTestId('empty-state').textContent()).toContain('No projects yet');
    await shot('02-project-list-empty');

    // Sign out, sign in again (a wrong password first: the server's message must show)
    await signOut();
    await page.getByRole('textbox', { name: 'E-mail address', exact: true }).fill(newUser.email);
    await page.getByRole('textbox', { name: 'Password', exact: true }).fill('not the password');
    app.expectRefusal(401, '/api/auth/login');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await expect
      .poll(() => page.locator('.q-notification').first().textContent())
      .toContain('Wrong e-mail or password');
    await shot('03-sign-in-refused');
    await signIn(newUser.email, newUser.password);

    // Create a project
    await page.getByTestId('new-project').click();
    await page.getByRole('textbox', { name: 'Project name', exact: true }).fill(projectName);
    await page
      .getByRole('textbox', { name: 'Description (optional)', exact: true })
      .fill('Restored radio map of the Aster Wide Survey, band 2.');
    await page.getByTestId('create-project').click();
    await page.waitForURL(/\/projects\/\d+$/);
    await expect.poll(() => page.getByTestId('project-name').textContent()).toBe(projectName);
    await expect.poll(() => page.getByTestId('member-list').textContent()).toContain(newUser.email);

    // Invite a colleague who has no account yet
    await page.getByRole('textbox', { name: "Colleague's e-mail address", exact: true }).fill(colleague);
    await page.getByTestId('invite-submit').click();
    await expect.poll(() => page.getByTestId('invitation-list').textContent()).toContain(colleague);
    await shot('04-project-page');

    const mails = await mailTo(app.runtime.ctx, colleague);
    expect(mails, `invitation mails to ${colleague}`).toHaveLength(1);
    const invitationMail = mails[0]!;
    expect(invitationMail.text).toContain(projectName);
    const link = /http:\/\/127\.0\.0\.1:\d+\/signup\?invitation=[^\s"<>]+/.exec(invitationMail.text)?.[0];
    expect(link, `sign-up link in: ${invitationMail.text}`).toBeDefined();

    // Account page and tokens (the secret is shown once)
    await page.goto(`${app.url}/account`);
    await page.getByTestId('token-name').fill('e2e pipeline');
    await page.getByTestId('token-create').click();
    await expect.poll(() => page.getByTestId('token-secret').textContent()).toContain('shown only once');
    await shot('05-account');

    // Dark theme of the project list
    await page.goto(`${app.url}/projects`);
    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await shot('06-project-list-dark');
    await page.getByTestId('theme-toggle').first().click();

    await signOut();
    await shot('07-sign-in');

    // The administrator finds the invitation in the development inbox
    await signIn(admin.email, admin.password);
    await page.goto(`${app.url}/admin/mail`);
    await page.getByTestId('mail-list').getByText(`to ${colleague}`).click();
    await expect.poll(() => page.getByTestId('mail-body').textContent()).toContain('/signup?invitation=');
    await shot('08-admin-mail');
    await page.goto(`${app.url}/admin/users`);
    await expect.poll(() => page.locator('.q-table').textContent()).toContain(newUser.email);
    await shot('09-admin-users');
    await page.goto(`${app.url}/admin/audit`);
    await expect.poll(() => page.locator('.q-table').textContent()).toContain('invitation.created');
    await shot('10-admin-audit');
    await signOut();

    // The colleague follows the link, signs up and is in the project
    await page.goto(link!);
    await expect.poll(() => page.getByTestId('invitation-banner').textContent()).toContain(projectName);
    expect(await page.getByRole('textbox', { name: 'E-mail address', exact: true }).inputValue()).toBe(
      colleague,
    );
    await page.getByRole('textbox', { name: 'Display name', exact: true }).fill('Tomas Verhoeven');
    await page.getByRole('textbox', { name: 'Password', exact: true }).fill('tomas-password-9');
    await page.getByRole('textbox', { name: 'Repeat password', exact: true }).fill('tomas-password-9');
    await shot('11-sign-up-invited');
    await page.getByRole('button', { name: 'Create account' }).click();
    await page.waitForURL(/\/projects$/);
    await expect.poll(() => page.getByTestId('project-link').first().textContent()).toContain(projectName);
    await signOut();

    expect(app.problems).toEqual([]);
  });
});
