import { describe, expect, it } from 'vitest';

import { ApiError, createApiClient } from '@/boot/api';
import { apiError, mockApi } from './support/api-mock';
import { makeProject } from './support/fixtures';

describe('API client', () => {
  it('parses answers with the shared schemas', async () => {
    mockApi({ 'GET /api/projects': { body: [makeProject({ name: 'Lyra Deep Field' })] } });
    const projects = await createApiClient().projects.list();
    expect(projects.map((project) => project.name)).toEqual(['Lyra Deep Field']);
  });

  it('refuses an answer of the wrong shape instead of passing it on', async () => {
    mockApi({ 'GET /api/projects': { body: [{ id: 'seven' }] } });
    const failure = await createApiClient()
      .projects.list()
      .catch((error: unknown) => error);
    expect(failure).toBeInstanceOf(ApiError);
    expect((failure as ApiError).code).toBe('unexpected_response');
    expect((failure as ApiError).message).toBe(
      "The server's answer to GET /api/projects did not have the expected shape.",
    );
  });

  it("carries the server's code, status and message", async () => {
    mockApi({ 'POST /api/projects': apiError(409, 'conflict', 'A project with that name exists.') });
    const failure = (await createApiClient()
      .projects.create({ name: 'x' })
      .catch((error: unknown) => error)) as ApiError;
    expect([failure.status, failure.code, failure.message]).toEqual([
      409,
      'conflict',
      'A project with that name exists.',
    ]);
  });

  it('lists validation problems per field', async () => {
    mockApi({
      'POST /api/auth/signup': {
        status: 400,
        body: {
          error: {
            code: 'validation_failed',
            message: 'Some fields need attention.',
            details: { issues: [{ path: ['email'], message: 'Enter a valid e-mail address.' }] },
          },
        },
      },
    });
    const failure = (await createApiClient()
      .auth.signup({ email: 'x', displayName: 'X', password: 'p' })
      .catch((error: unknown) => error)) as ApiError;
    expect(failure.fieldIssues).toEqual([{ path: ['email'], message: 'Enter a valid e-mail address.' }]);
  });

  it('sends the CSRF token on changes, fetches it once, and retries once when the server rejects it', async () => {
    let tokenRequests = 0;
    let attempts = 0;
    const api = mockApi({
      'GET /api/auth/csrf': () => ({ body: { token: `token-${++tokenRequests}` } }),
      'DELETE /api/tokens/:id': () =>
        ++attempts === 1 ? apiError(403, 'csrf_invalid', 'The form expired.') : { status: 204 },
    });
    const client = createApiClient();
    await client.tokens.revoke(3);
    expect(api.callsTo('DELETE /api/tokens/:id').map((call) => call.headers['x-csrf-token'])).toEqual([
      'token-1',
      'token-2',
    ]);
    await client.tokens.revoke(4);
    expect(tokenRequests).toBe(2);
    expect(api.callsTo('GET /api/auth/csrf')).toHaveLength(2);
  });

  it('does not retry a second CSRF rejection forever', async () => {
    const api = mockApi({ 'POST /api/auth/logout': apiError(403, 'csrf_invalid', 'The form expired.') });
    const failure = (await createApiClient()
      .auth.logout()
      .catch((error: unknown) => error)) as ApiError;
    expect(failure.message).toBe('The form expired.');
    expect(api.callsTo('POST /api/auth/logout')).toHaveLength(2);
  });

  it('explains an unreachable server in plain words', async () => {
    const api = mockApi({});
    const failure = (await createApiClient()
      .projects.list()
      .catch((error: unknown) => error)) as ApiError;
    expect(failure.code).toBe('network');
    expect(failure.message).toContain('cannot be reached');
    expect(() => api.expectNoUnexpectedCalls()).toThrow('Undeclared API requests: GET /api/projects');
  });

  it('explains an error answer without the usual body', async () => {
    mockApi({ 'GET /api/health': { status: 502 } });
    const failure = (await createApiClient()
      .config.health()
      .catch((error: unknown) => error)) as ApiError;
    expect(failure.status).toBe(502);
    expect(failure.message).toContain('502');
  });
});

describe('API client and an ended session', () => {
  it('reports a 401 from an ordinary route, but not from the sign-in check or sign-in itself', async () => {
    mockApi({
      'GET /api/projects': apiError(401, 'unauthenticated', 'Your session has ended. Sign in again.'),
      'GET /api/auth/me': apiError(401, 'unauthenticated', 'Not signed in.'),
      'POST /api/auth/login': apiError(401, 'wrong_credentials', 'Wrong e-mail or password.'),
    });
    const client = createApiClient();
    let ended = 0;
    client.whenSessionEnds(() => ended++);
    await client.auth.me().catch(() => undefined);
    await client.auth.login({ email: 'a@b.c', password: 'x' }).catch(() => undefined);
    expect(ended).toBe(0);
    const failure = (await client.projects.list().catch((error: unknown) => error)) as ApiError;
    expect(failure.message).toBe('Your session has ended. Sign in again.');
    expect(ended).toBe(1);
  });
});
