// @vitest-environment node
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { sessionResponseSchema, userResponseSchema } from '../../shared/auth';
import { AuditEvent } from '../../server/models/audit-event';
import { User } from '../../server/models/user';
import {
  apiError,
  BrowserClient,
  createUser,
  signIn,
  startTestApp,
  type TestApp,
  testPassword,
} from '../support/test-app';

let t: TestApp;
beforeAll(async () => {
  t = await startTestApp();
});
afterAll(async () => {
  await t.close();
});

describe('health and public config', () => {
  it('reports version and database status', async () => {
    const response = await request(t.app).get('/api/health').expect(200);
    expect(response.body).toEqual({ status: 'ok', version: t.ctx.version, database: 'ok' });
  });
  it('publishes what the client needs before sign-in', async () => {
    const response = await request(t.app).get('/api/config/public').expect(200);
    expect(response.body).toEqual({
      registrationOpen: true,
      version: t.ctx.version,
      devMail: true,
      passwordMinLength: 10,
    });
  });
  it('answers unknown API paths with the JSON error shape', async () => {
    const response = await request(t.app).get('/api/nothing-here').expect(404);
    expect(response.body).toEqual({
      error: { code: 'not_found', message: 'No API route GET /api/nothing-here.' },
    });
  });
  it('sends security headers (helmet) with a CSP that allows own scripts and blob: workers', async () => {
    const response = await request(t.app).get('/api/health');
    const csp = response.headers['content-security-policy'] as string;
    expect(csp).toContain("script-src 'self'");
    expect(csp).toContain("worker-src 'self' blob:");
    expect(csp).toContain("style-src 'self' 'unsafe-inline'");
    expect(response.headers['x-content-type-options']).toBe('nosniff');
    expect(response.headers['x-powered-by']).toBeUndefined();
  });
});

describe('sign-up', () => {
  it('creates the account with the default quota, signs in and audits', async () => {
    const client = new BrowserClient(t.app);
    const response = await client.post('/api/auth/signup', {
      email: '  Vega@Example.org ',
      displayName: 'Vega Lyrae',
      password: 'a-long-enough-password',
    });
    expect(response.status).toBe(201);
    const { user } = userResponseSchema.parse(response.body);
    expect(user).toMatchObject({
      email: 'Vega@Example.org',
      displayName: 'Vega Lyrae',
      role: 'member',
      quotaBytes: t.ctx.config.defaultQuotaBytes,
      bytesUsed: 0,
      disabled: false,
    });
    expect(response.body.user.passwordHash).toBeUndefined();
    const me = await client.get('/api/auth/me').expect(200);
    expect(me.body.user.id).toBe(user.id);
    expect(await AuditEvent.query().where({ action: 'auth.sign-up', actorId: user.id }).resultSize()).toBe(1);
    // Stored as a bcrypt hash, never in clear.
    const row = await User.query().findById(user.id);
    expect(row?.passwordHash).toMatch(/^\$2[aby]\$/);
  });
  it('refuses a second account with the same e-mail in other letter case (409)', async () => {
    await createUser(t.ctx, { email: 'deneb@example.org' });
    const response = await new BrowserClient(t.app).post('/api/auth/signup', {
      email: 'DENEB@example.org',
      displayName: 'Deneb',
      password: 'a-long-enough-password',
    });
    expect(response.status).toBe(409);
    expect(response.body).toEqual(
      apiError('conflict', 'An account with this e-mail address already exists.'),
    );
  });
  it('enforces the minimum password length with a field issue', async () => {
    const response = await new BrowserClient(t.app).post('/api/auth/signup', {
      email: 'short@example.org',
      displayName: 'Short',
      password: 'short',
    });
    expect(response.status).toBe(400);
    expect(response.body.error.code).toBe('validation_failed');
    expect(response.body.error.message).toBe('password: Passwords must be at least 10 characters long.');
    expect(response.body.error.details.issues).toEqual([
      { path: ['password'], message: 'Passwords must be at least 10 characters long.' },
    ]);
  });
  it('rejects an invalid e-mail with a readable message', async () => {
    const response = await new BrowserClient(t.app).post('/api/auth/signup', {
      email: 'not-an-address',
      displayName: 'X',
      password: 'a-long-enough-password',
    });
    expect(response.status).toBe(400);
    expect(response.body.error.message).toBe('email: Enter a valid e-mail address.');
  });
  it('answers 403 when registration is closed and no invitation is given', async () => {
    const closed = await startTestApp({ registrationOpen: false }, t.db);
    try {
      const response = await new BrowserClient(closed.app).post('/api/auth/signup', {
        email: 'closed@example.org',
        displayName: 'Closed',
        password: 'a-long-enough-password',
      });
      expect(response.status).toBe(403);
      expect(response.body).toEqual(
        apiError(
          'forbidden',
          'Registration is closed. Ask an administrator or a project owner to invite you, then use the link in the e-mail.',
        ),
      );
      expect(await User.query().modify('byEmail', 'closed@example.org').resultSize()).toBe(0);
    } finally {
      await closed.close();
    }
  });
});

describe('sign-in and sign-out', () => {
  it('signs in case-insensitively, records the time and audits', async () => {
    const user = await createUser(t.ctx, { email: 'altair@example.org' });
    const client = new BrowserClient(t.app);
    const response = await client.post('/api/auth/login', {
      email: 'ALTAIR@example.org',
      password: testPassword,
    });
    expect(response.status).toBe(200);
    expect(response.body.user.id).toBe(user.id);
    expect(response.headers['set-cookie']?.toString()).toMatch(/skysieve\.sid=.*HttpOnly.*SameSite=Lax/i);
    expect((await User.query().findById(user.id))?.lastSignInAt).toBeInstanceOf(Date);
    expect(await AuditEvent.query().where({ action: 'auth.sign-in', actorId: user.id }).resultSize()).toBe(1);
  });
  it('answers 401 with the exact message for a wrong password or an unknown e-mail, and audits both', async () => {
    const user = await createUser(t.ctx, { email: 'sheliak@example.org' });
    for (const body of [
      { email: 'sheliak@example.org', password: 'wrong-password' },
      { email: 'nobody@example.org', password: 'wrong-password' },
    ]) {
      const response = await new BrowserClient(t.app).post('/api/auth/login', body);
      expect(response.status).toBe(401);
      expect(response.body).toEqual({
        error: { code: 'wrong_credentials', message: 'Wrong e-mail or password.' },
      });
    }
    const failures = await AuditEvent.query()
      .where('action', 'auth.sign-in-failed')
      .whereRaw("details->>'email' in (?, ?)", ['sheliak@example.org', 'nobody@example.org']);
    expect(failures).toHaveLength(2);
    expect(failures.find((event) => event.targetId === user.id)?.details).toMatchObject({
      reason: 'wrong password',
    });
  });
  it('answers 403 for a disabled account', async () => {
    await createUser(t.ctx, { email: 'sulafat@example.org', disabled: true });
    const response = await new BrowserClient(t.app).post('/api/auth/login', {
      email: 'sulafat@example.org',
      password: testPassword,
    });
    expect(response.status).toBe(403);
    expect(response.body).toEqual(
      apiError('forbidden', 'This account is disabled. Ask an administrator to enable it again.'),
    );
  });
  it('signs out: the session ends and /me answers 401', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    await client.get('/api/auth/me').expect(200);
    const out = await client.post('/api/auth/logout');
    expect(out.status).toBe(204);
    const me = await client.get('/api/auth/me');
    expect(me.status).toBe(401);
    expect(me.body).toEqual({ error: { code: 'unauthenticated', message: 'Sign in to continue.' } });
    expect(await AuditEvent.query().where({ action: 'auth.sign-out', actorId: user.id }).resultSize()).toBe(
      1,
    );
  });
  it('/me answers 401 without a session', async () => {
    const response = await request(t.app).get('/api/auth/me').expect(401);
    expect(response.body.error.code).toBe('unauthenticated');
  });
  it('the session probe answers 200 with user null when signed out, the account when signed in', async () => {
    const nobody = await request(t.app).get('/api/auth/session').expect(200);
    expect(nobody.body).toEqual({ user: null });
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const signedIn = await client.get('/api/auth/session').expect(200);
    expect(sessionResponseSchema.parse(signedIn.body).user?.id).toBe(user.id);
    expect((await client.post('/api/auth/logout')).status).toBe(204);
    expect((await client.get('/api/auth/session').expect(200)).body).toEqual({ user: null });
    // Only the probe changed: /me still refuses a signed-out caller.
    await client.get('/api/auth/me').expect(401);
  });
  it('the session probe shows nobody for a session whose account was disabled meanwhile', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    await User.query().patch({ disabled: true }).where('id', user.id);
    expect((await client.get('/api/auth/session').expect(200)).body).toEqual({ user: null });
  });
});

describe('own account', () => {
  it('changes display name and notification setting', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const response = await client.patch('/api/auth/me', { displayName: 'Renamed', emailOnRunFinish: false });
    expect(response.status).toBe(200);
    expect(response.body.user).toMatchObject({ displayName: 'Renamed', emailOnRunFinish: false });
  });
  it('changes the password after checking the current one; other sessions end', async () => {
    const user = await createUser(t.ctx);
    const first = await signIn(t.app, user.email);
    const second = await signIn(t.app, user.email);
    const wrong = await first.post('/api/auth/password', {
      currentPassword: 'not-it-at-all',
      newPassword: 'brand-new-password',
    });
    expect(wrong.status).toBe(400);
    expect(wrong.body).toEqual(apiError('bad_request', 'Your current password is not correct.'));
    const short = await first.post('/api/auth/password', {
      currentPassword: testPassword,
      newPassword: 'short',
    });
    expect(short.status).toBe(400);
    expect(short.body.error.message).toBe('newPassword: Passwords must be at least 10 characters long.');
    const ok = await first.post('/api/auth/password', {
      currentPassword: testPassword,
      newPassword: 'brand-new-password',
    });
    expect(ok.status).toBe(204);
    await first.get('/api/auth/me').expect(200);
    await second.get('/api/auth/me').expect(401);
    await signIn(t.app, user.email, 'brand-new-password');
    const old = await new BrowserClient(t.app).post('/api/auth/login', {
      email: user.email,
      password: testPassword,
    });
    expect(old.status).toBe(401);
  });
});

describe('session cookie behind a TLS proxy', () => {
  it('is marked Secure when TRUST_PROXY is on and the proxy says https', async () => {
    const proxied = await startTestApp({ trustProxy: true, publicUrl: 'https://sky.example.org' }, t.db);
    try {
      const response = await request(proxied.app).get('/api/auth/csrf').set('x-forwarded-proto', 'https');
      const cookies = String(response.headers['set-cookie']);
      expect(cookies).toMatch(/skysieve\.sid=[^;]+;.*Secure/);
      expect(cookies).toMatch(/skysieve\.csrf=[^;]+;.*Secure/);
      expect(response.headers['strict-transport-security']).toBeDefined();
      const plain = await request(t.app).get('/api/auth/csrf');
      expect(String(plain.headers['set-cookie'])).not.toContain('Secure');
    } finally {
      await proxied.close();
    }
  });
});
