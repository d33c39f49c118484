// @vitest-environment node
/** The built client is served from one folder with SPA fallback; /api stays JSON. */
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';

import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { createApp, type SkysieveApp } from '../../server/app';
import { startTestApp, type TestApp } from '../support/test-app';

let t: TestApp;
let built: SkysieveApp;
let clientDirectory: string;
beforeAll(async () => {
  t = await startTestApp();
  clientDirectory = mkdtempSync(path.join(os.tmpdir(), 'skysieve-dist-'));
  mkdirSync(path.join(clientDirectory, 'assets'));
  writeFileSync(
    path.join(clientDirectory, 'index.html'),
    '<!doctype html><title>Skysieve</title><div id="app"></div>',
  );
  writeFileSync(path.join(clientDirectory, 'assets', 'main-abc123.js'), 'console.log("skysieve");');
  built = createApp(t.ctx, { clientDirectory });
});
afterAll(async () => {
  await built.close();
  await t.close();
  rmSync(clientDirectory, { recursive: true, force: true });
});

describe('serving the built client', () => {
  it('serves index.html for client routes (deep links, reset links)', async () => {
    for (const route of ['/', '/projects/12', '/reset/some-token', '/admin/mail']) {
      const response = await request(built.app).get(route);
      expect(response.status, route).toBe(200);
      expect(response.headers['content-type']).toMatch(/text\/html/);
      expect(response.text).toContain('<title>Skysieve</title>');
    }
  });
  it('serves assets with their type', async () => {
    const response = await request(built.app).get('/assets/main-abc123.js').expect(200);
    expect(response.headers['content-type']).toMatch(/javascript/);
    expect(response.text).toBe('console.log("skysieve");');
  });
  it('keeps unknown /api paths as JSON 404s', async () => {
    const response = await request(built.app).get('/api/not-a-route');
    expect(response.status).toBe(404);
    expect(response.body.error.code).toBe('not_found');
  });
  it('without a build, answers 404 outside /api', async () => {
    expect((await request(t.app).get('/projects/12')).status).toBe(404);
  });
});
