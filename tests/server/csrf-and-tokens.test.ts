// @vitest-environment node
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { createdTokenSchema } from '../../shared/tokens';
import { sha256Hex } from '../../server/auth/secrets';
import { ApiToken } from '../../server/models/api-token';
import { User } from '../../server/models/user';
import { LAST_USED_RESOLUTION_MS } from '../../server/tokens/tokens.service';
import { apiError, createUser, signIn, startTestApp, type TestApp, TokenClient } from '../support/test-app';

let t: TestApp;
beforeAll(async () => {
  t = await startTestApp();
});
afterAll(async () => {
  await t.close();
});

const csrfMessage =
  'The security token of this page is missing or out of date. Reload the page and try again.';

describe('CSRF protection of cookie sessions', () => {
  it('refuses a state-changing cookie request without the x-csrf-token header (403)', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const response = await client.agent.post('/api/projects').send({ name: 'No token' });
    expect(response.status).toBe(403);
    expect(response.body).toEqual({ error: { code: 'csrf_invalid', message: csrfMessage } });
  });
  it('refuses a wrong token and a token of another session', async () => {
    const [a, b] = [await createUser(t.ctx), await createUser(t.ctx)];
    const clientA = await signIn(t.app, a.email);
    const clientB = await signIn(t.app, b.email);
    const tokenOfB = await clientB.csrfToken();
    for (const token of ['garbage', tokenOfB]) {
      const response = await clientA.agent
        .post('/api/projects')
        .set('x-csrf-token', token)
        .send({ name: 'Forged' });
      expect(response.status).toBe(403);
      expect(response.body.error.code).toBe('csrf_invalid');
    }
  });
  it('accepts the token of the session and keeps it valid for the whole session', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const token = await client.csrfToken();
    for (const name of ['First', 'Second']) {
      const response = await client.agent.post('/api/projects').set('x-csrf-token', token).send({ name });
      expect(response.status).toBe(201);
    }
    expect(await client.csrfToken()).toBe(token);
  });
  it('protects sign-in itself (login CSRF)', async () => {
    const user = await createUser(t.ctx);
    const response = await request(t.app).post('/api/auth/login').send({ email: user.email, password: 'x' });
    expect(response.status).toBe(403);
    expect(response.body.error.code).toBe('csrf_invalid');
  });
  it('does not ask for a token on GET', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    await client.agent.get('/api/projects').expect(200);
  });
});

describe('personal API tokens', () => {
  it('creates a token shown once, stores only its SHA-256, lists and revokes it', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const created = await client.post('/api/tokens', { name: 'pipeline' });
    expect(created.status).toBe(201);
    const token = createdTokenSchema.parse(created.body);
    expect(token.token).toMatch(/^sks_[A-Za-z0-9_-]{43}$/);
    expect(token.token.startsWith(token.prefix)).toBe(true);
    const row = await ApiToken.query().findById(token.id);
    expect(row?.tokenHash).toBe(sha256Hex(token.token));
    expect(JSON.stringify(row)).not.toContain(token.token);

    const list = await client.get('/api/tokens').expect(200);
    expect(list.body).toEqual([
      { id: token.id, name: 'pipeline', prefix: token.prefix, createdAt: token.createdAt, lastUsedAt: null },
    ]);
    expect(JSON.stringify(list.body)).not.toContain(token.token);

    const bearer = new TokenClient(t.app, token.token);
    const me = await bearer.get('/api/auth/me').expect(200);
    expect(me.body.user.id).toBe(user.id);
    expect((await ApiToken.query().findById(token.id))?.lastUsedAt).toBeInstanceOf(Date);

    expect((await client.delete(`/api/tokens/${token.id}`)).status).toBe(204);
    const refused = await bearer.get('/api/auth/me');
    expect(refused.status).toBe(401);
    expect(refused.body).toEqual(
      apiError(
        'unauthenticated',
        'This API token is not valid (revoked, mistyped or its account is disabled).',
      ),
    );
  });
  it('records a use at most once a minute, so concurrent requests do not queue on the token row', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const created = createdTokenSchema.parse((await client.post('/api/tokens', { name: 'busy' })).body);
    const bearer = new TokenClient(t.app, created.token);
    const lastUsed = async () => (await ApiToken.query().findById(created.id))?.lastUsedAt ?? null;

    const before = Date.now();
    await bearer.get('/api/auth/me').expect(200);
    const first = await lastUsed();
    expect(first).toBeInstanceOf(Date);
    expect(first!.getTime()).toBeGreaterThanOrEqual(before - 1000);

    // Within the minute: neither sequential nor concurrent requests write again.
    await bearer.get('/api/auth/me').expect(200);
    await Promise.all(Array.from({ length: 10 }, () => bearer.get('/api/auth/me').expect(200)));
    expect((await lastUsed())?.getTime()).toBe(first!.getTime());

    // Once the recorded use is older than the resolution, the next request records it again.
    const old = new Date(Date.now() - LAST_USED_RESOLUTION_MS - 5000);
    await ApiToken.query().patch({ lastUsedAt: old }).where('id', created.id);
    await bearer.get('/api/auth/me').expect(200);
    const renewed = await lastUsed();
    expect(renewed!.getTime()).toBeGreaterThan(old.getTime() + LAST_USED_RESOLUTION_MS);
    const listed = (await client.get('/api/tokens').expect(200)).body as { lastUsedAt: string | null }[];
    expect(listed[0]?.lastUsedAt).toBe(renewed!.toISOString());
  });
  it('lets Bearer requests change state without CSRF and without a cookie', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const { token } = (await client.post('/api/tokens', { name: 'ci' })).body as { token: string };
    const response = await new TokenClient(t.app, token).post('/api/projects', { name: 'From a script' });
    expect(response.status).toBe(201);
    expect(response.headers['set-cookie']).toBeUndefined();
  });
  it("answers 404 when revoking another user's token", async () => {
    const [owner, other] = [await createUser(t.ctx), await createUser(t.ctx)];
    const ownerClient = await signIn(t.app, owner.email);
    const { id } = (await ownerClient.post('/api/tokens', { name: 'mine' })).body as { id: number };
    const response = await (await signIn(t.app, other.email)).delete(`/api/tokens/${id}`);
    expect(response.status).toBe(404);
    expect(response.body).toEqual(apiError('not_found', 'No such token.'));
    expect(await ApiToken.query().findById(id)).toBeDefined();
  });
  it('refuses a token whose account was disabled (checked on every request)', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const { token } = (await client.post('/api/tokens', { name: 'ci' })).body as { token: string };
    const bearer = new TokenClient(t.app, token);
    await bearer.get('/api/projects').expect(200);
    await User.query().patch({ disabled: true }).where('id', user.id);
    expect((await bearer.get('/api/projects')).status).toBe(401);
  });
  it('answers 401 for a malformed Authorization header instead of falling back to the cookie', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const response = await client.agent.get('/api/auth/me').set('authorization', 'Basic abc');
    expect(response.status).toBe(401);
  });
  it('validates the token name', async () => {
    const user = await createUser(t.ctx);
    const response = await (await signIn(t.app, user.email)).post('/api/tokens', { name: '   ' });
    expect(response.status).toBe(400);
    expect(response.body.error.message).toBe('name: Give the token a name.');
  });
});

describe('request errors', () => {
  it('answers 400 for a body that is not JSON', async () => {
    const user = await createUser(t.ctx);
    const client = await signIn(t.app, user.email);
    const token = await client.csrfToken();
    const response = await client.agent
      .post('/api/projects')
      .set('x-csrf-token', token)
      .set('content-type', 'application/json')
      .send('{"name": ');
    expect(response.status).toBe(400);
    expect(response.body).toEqual({
      error: { code: 'validation_failed', message: 'The request body is not valid JSON.' },
    });
  });
  it('answers 413 for a JSON body over 1 MB', async () => {
    const response = await request(t.app)
      .post('/api/auth/login')
      .set('content-type', 'application/json')
      .send(JSON.stringify({ email: 'x'.repeat(1_100_000), password: 'y' }));
    expect(response.status).toBe(413);
    expect(response.body).toEqual({
      error: { code: 'payload_too_large', message: 'The request body is too large.' },
    });
  });
  it('answers 400 with zod details for a non-numeric id', async () => {
    const user = await createUser(t.ctx);
    const response = await (await signIn(t.app, user.email)).get('/api/projects/abc');
    expect(response.status).toBe(400);
    expect(response.body.error.code).toBe('validation_failed');
    expect(response.body.error.details.issues[0].path).toEqual(['id']);
  });
});
