// @vitest-environment node
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { createApp } from '../../server/app';
import { startTestApp, type TestApp } from '../support/test-app';

let t: TestApp;
beforeAll(async () => {
  t = await startTestApp();
});
afterAll(async () => {
  await t.close();
});

interface OpenApiDocument {
  openapi: string;
  info: { title: string; version: string };
  paths: Record<string, Record<string, { responses: Record<string, unknown>; requestBody?: unknown }>>;
}

// The routes of the API contract (shared/API.md), written out by hand so a route lost from the
// declarations fails here.
const contract = [
  'get /api/health',
  'get /api/config/public',
  'get /api/openapi.json',
  'get /api/auth/csrf',
  'post /api/auth/signup',
  'post /api/auth/login',
  'post /api/auth/logout',
  'get /api/auth/session',
  'get /api/auth/me',
  'patch /api/auth/me',
  'post /api/auth/password',
  'post /api/auth/password-reset/request',
  'post /api/auth/password-reset/confirm',
  'get /api/auth/invitations/{token}',
  'get /api/tokens',
  'post /api/tokens',
  'delete /api/tokens/{id}',
  'get /api/projects',
  'post /api/projects',
  'get /api/projects/{id}',
  'patch /api/projects/{id}',
  'delete /api/projects/{id}',
  'get /api/projects/{id}/members',
  'post /api/projects/{id}/members',
  'patch /api/projects/{id}/members/{userId}',
  'delete /api/projects/{id}/members/{userId}',
  'post /api/projects/{id}/leave',
  'get /api/projects/{id}/invitations',
  'delete /api/projects/{id}/invitations/{invitationId}',
  'post /api/projects/{id}/images',
  'get /api/projects/{id}/images',
  'get /api/images/{id}',
  'patch /api/images/{id}',
  'delete /api/images/{id}',
  'get /api/images/{id}/thumbnail',
  'get /api/images/{id}/original',
  'get /api/images/{id}/pixels',
  'post /api/images/{id}/runs',
  'get /api/images/{id}/runs',
  'get /api/runs/{id}',
  'post /api/runs/{id}/cancel',
  'delete /api/runs/{id}',
  'get /api/runs/{id}/events',
  'get /api/runs/{id}/sources',
  'get /api/runs/{id}/components/{name}',
  'get /api/runs/{id}/cutout',
  'post /api/projects/{id}/comparisons',
  'get /api/projects/{id}/comparisons',
  'get /api/comparisons/{id}',
  'patch /api/comparisons/{id}',
  'delete /api/comparisons/{id}',
  'get /api/comparisons/{id}/difference',
  'get /api/comparisons/{id}/cross-match',
  'get /api/runs/{id}/quicklook.png',
  'post /api/runs/{id}/injection-studies',
  'get /api/runs/{id}/injection-studies',
  'get /api/runs/{id}/injection-studies/{studyId}',
  'post /api/runs/{id}/injection-studies/{studyId}/cancel',
  'delete /api/runs/{id}/injection-studies/{studyId}',
  'get /api/runs/{id}/injection-studies/{studyId}/export',
  'get /api/runs/{id}/number-counts',
  'post /api/projects/{id}/reference-catalogues/preview',
  'post /api/projects/{id}/reference-catalogues',
  'get /api/projects/{id}/reference-catalogues',
  'get /api/projects/{id}/reference-catalogues/{catalogueId}',
  'delete /api/projects/{id}/reference-catalogues/{catalogueId}',
  'post /api/runs/{id}/cross-match',
  'get /api/runs/{id}/cross-match',
  'get /api/admin/users',
  'patch /api/admin/users/{id}',
  'get /api/admin/audit',
  'get /api/admin/mail',
  'get /api/admin/mail/{id}',
  'get /api/admin/storage',
];

describe('OpenAPI document', () => {
  it('is served at /api/openapi.json and lists every route of the contract and every mounted route', async () => {
    const response = await request(t.app).get('/api/openapi.json').expect(200);
    const document = response.body as OpenApiDocument;
    expect(document.openapi).toBe('3.0.3');
    expect(document.info).toEqual(expect.objectContaining({ title: 'Skysieve API', version: t.ctx.version }));
    const listed = Object.entries(document.paths).flatMap(([path, methods]) =>
      Object.keys(methods).map((method) => `${method} ${path}`),
    );
    expect(listed.sort()).toEqual(expect.arrayContaining(contract));
    const built = createApp(t.ctx, { clientDirectory: '/nonexistent' });
    try {
      const mounted = built.routes.map((route) => `${route.method} ${route.path.replace(/:(\w+)/g, '{$1}')}`);
      expect(listed.sort()).toEqual([...mounted, 'get /api/openapi.json'].sort());
    } finally {
      await built.close();
    }
  });
  it('describes bodies and responses from the zod schemas', async () => {
    const document = (await request(t.app).get('/api/openapi.json')).body as OpenApiDocument;
    const signup = document.paths['/api/auth/signup']?.post;
    expect(JSON.stringify(signup?.requestBody)).toContain('"displayName"');
    expect(Object.keys(signup?.responses ?? {})).toEqual(
      expect.arrayContaining(['201', '400', '403', '409', '429']),
    );
    const addMember = document.paths['/api/projects/{id}/members']?.post;
    expect(Object.keys(addMember?.responses ?? {})).toEqual(
      expect.arrayContaining(['201', '202', '401', '403', '404', '409']),
    );
    expect(JSON.stringify(document.paths['/api/projects/{id}']?.get?.responses['200'])).toContain(
      '"members"',
    );
  });
});
