// @vitest-environment node
/** Password reset through the real development SMTP receiver: read the mail, follow the link, single use, expiry. */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { PasswordReset } from '../../server/models/password-reset';
import { BrowserClient, createUser, mailTo, signIn, startTestApp, type TestApp } from '../support/test-app';

let t: TestApp;
beforeAll(async () => {
  t = await startTestApp({ resetRateLimit: 100 });
});
afterAll(async () => {
  await t.close();
});

/** The token from the last reset mail to `email`, read from the stored message text. */
async function resetTokenFromMail(email: string): Promise<string> {
  const mails = await mailTo(t.ctx, email);
  const text = mails.at(-1)?.text ?? '';
  const match = /http:\/\/skysieve\.test\/reset\/([A-Za-z0-9_-]+)/.exec(text);
  if (!match?.[1]) throw new Error(`No reset link in the last mail to ${email}:\n${text}`);
  return match[1];
}

describe('password reset', () => {
  it('mails a link; the token sets a new password once, ends every session, and is stored hashed', async () => {
    const user = await createUser(t.ctx, { email: 'forgetful@example.org' });
    const oldSession = await signIn(t.app, user.email);
    const request = await new BrowserClient(t.app).post('/api/auth/password-reset/request', {
      email: 'Forgetful@example.org',
    });
    expect(request.status).toBe(202);
    const mails = await mailTo(t.ctx, 'forgetful@example.org');
    expect(mails).toHaveLength(1);
    expect(mails[0]?.subject).toBe('Reset your Skysieve password');
    expect(mails[0]?.html).toContain('href="http://skysieve.test/reset/');
    const token = await resetTokenFromMail('forgetful@example.org');
    const stored = await PasswordReset.query().where('userId', user.id);
    expect(stored).toHaveLength(1);
    expect(stored[0]?.tokenHash).not.toContain(token);
    const minutes = ((stored[0]?.expiresAt.getTime() ?? 0) - Date.now()) / 60_000;
    expect(minutes).toBeGreaterThan(59);
    expect(minutes).toBeLessThanOrEqual(60);

    const confirm = await new BrowserClient(t.app).post('/api/auth/password-reset/confirm', {
      token,
      password: 'remembered-now-1',
    });
    expect(confirm.status).toBe(204);
    expect((await oldSession.get('/api/auth/me')).status).toBe(401);
    await signIn(t.app, user.email, 'remembered-now-1');

    const reuse = await new BrowserClient(t.app).post('/api/auth/password-reset/confirm', {
      token,
      password: 'another-password-2',
    });
    expect(reuse.status).toBe(400);
    expect(reuse.body).toEqual({
      error: {
        code: 'bad_request',
        message: 'This reset link is not valid or was already used. Ask for a new one.',
      },
    });
  });
  it('refuses an expired link with its own message', async () => {
    const user = await createUser(t.ctx, { email: 'slow@example.org' });
    await new BrowserClient(t.app).post('/api/auth/password-reset/request', { email: user.email });
    const token = await resetTokenFromMail(user.email);
    await PasswordReset.query()
      .patch({ expiresAt: new Date(Date.now() - 1000) })
      .where('userId', user.id);
    const response = await new BrowserClient(t.app).post('/api/auth/password-reset/confirm', {
      token,
      password: 'too-late-password',
    });
    expect(response.status).toBe(400);
    expect(response.body.error.message).toBe('This reset link has expired. Ask for a new one.');
  });
  it('answers 202 for an unknown address and sends nothing (no account enumeration)', async () => {
    const response = await new BrowserClient(t.app).post('/api/auth/password-reset/request', {
      email: 'ghost@example.org',
    });
    expect(response.status).toBe(202);
    expect(response.body).toEqual({});
    expect(await mailTo(t.ctx, 'ghost@example.org')).toHaveLength(0);
  });
  it('sends nothing to a disabled account', async () => {
    await createUser(t.ctx, { email: 'off@example.org', disabled: true });
    expect(
      (await new BrowserClient(t.app).post('/api/auth/password-reset/request', { email: 'off@example.org' }))
        .status,
    ).toBe(202);
    expect(await mailTo(t.ctx, 'off@example.org')).toHaveLength(0);
  });
  it('checks the new password length', async () => {
    const response = await new BrowserClient(t.app).post('/api/auth/password-reset/confirm', {
      token: 'whatever',
      password: 'short',
    });
    expect(response.status).toBe(400);
    expect(response.body.error.message).toBe('password: Passwords must be at least 10 characters long.');
  });
});

describe('rate limits', () => {
  it('answers 429 after too many failed sign-ins from one address; successful ones do not count', async () => {
    const limited = await startTestApp({ signInRateLimit: 3 }, t.db);
    try {
      const user = await createUser(limited.ctx);
      for (let i = 0; i < 5; i++) await signIn(limited.app, user.email);
      const statuses: number[] = [];
      for (let i = 0; i < 4; i++) {
        const response = await new BrowserClient(limited.app).post('/api/auth/login', {
          email: user.email,
          password: 'wrong-password',
        });
        statuses.push(response.status);
        if (response.status === 429) {
          expect(response.body).toEqual({
            error: {
              code: 'rate_limited',
              message: 'Too many failed sign-in attempts. Wait 15 minutes and try again.',
            },
          });
        }
      }
      expect(statuses).toEqual([401, 401, 401, 429]);
    } finally {
      await limited.close();
    }
  });
  it('answers 429 after too many reset requests', async () => {
    const limited = await startTestApp({ resetRateLimit: 2 }, t.db);
    try {
      const statuses: number[] = [];
      for (let i = 0; i < 3; i++) {
        const response = await new BrowserClient(limited.app).post('/api/auth/password-reset/request', {
          email: 'a@example.org',
        });
        statuses.push(response.status);
      }
      expect(statuses).toEqual([202, 202, 429]);
    } finally {
      await limited.close();
    }
  });
});
