// @vitest-environment node
/** The one error middleware: database errors become honest statuses and never show SQL. */
import express from 'express';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { errorBodySchema } from '../../shared/errors';
import { errorHandler } from '../../server/http/error-handler';
import { Membership } from '../../server/models/membership';
import { User } from '../../server/models/user';
import { createUser, startTestApp, type TestApp } from '../support/test-app';

let t: TestApp;
let app: express.Express;
const logged: unknown[] = [];
beforeAll(async () => {
  t = await startTestApp();
  const existing = await createUser(t.ctx, { email: 'taken@example.org' });
  app = express();
  app.get('/unique', async () => {
    await User.query().insert({ ...existing, id: undefined, email: 'TAKEN@example.org' } as never);
  });
  app.get('/foreign-key', async () => {
    await Membership.query().insert({ projectId: 987654, userId: existing.id, role: 'viewer' });
  });
  app.get('/model-validation', async () => {
    await Membership.query().insert({ projectId: 1, userId: existing.id, role: 'chief' as never });
  });
  app.get('/not-found', async () => {
    await User.query().findById(987654).throwIfNotFound();
  });
  app.get('/syntax', async () => {
    await t.ctx.knex.raw('select * from no_such_table where secret_column = 1');
  });
  app.get('/crash', () => {
    throw new Error('internal detail that must not leak');
  });
  app.use(errorHandler((error) => logged.push(error)));
});
afterAll(async () => {
  await t.close();
});

describe('error middleware', () => {
  it.each([
    ['/unique', 409, 'conflict', 'That already exists.'],
    ['/foreign-key', 409, 'conflict', 'That refers to something that does not exist (or is still in use).'],
    ['/model-validation', 400, 'validation_failed', 'The data is not valid.'],
    ['/not-found', 404, 'not_found', 'Not found.'],
    ['/syntax', 500, 'internal', 'Something went wrong on the server.'],
    ['/crash', 500, 'internal', 'Something went wrong on the server.'],
  ])('%s → %i %s', async (path, status, code, message) => {
    const response = await request(app).get(path);
    expect(response.status).toBe(status);
    const body = errorBodySchema.parse(response.body);
    expect(body.error.code).toBe(code);
    expect(body.error.message).toBe(message);
    const text = JSON.stringify(response.body);
    for (const leak of [
      'select',
      'insert',
      'no_such_table',
      'secret_column',
      'internal detail',
      'users_email_lower_unique',
    ]) {
      expect(text.toLowerCase()).not.toContain(leak);
    }
  });
  it('logs only the unexpected errors (500s)', () => {
    expect(logged.length).toBeGreaterThanOrEqual(2);
    expect(logged.map(String).join('\n')).toContain('internal detail that must not leak');
  });
});
