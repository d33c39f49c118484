/**
 * A running Skysieve app for supertest: its own database, the real session store, CSRF and the
 * development SMTP receiver, with fast bcrypt. Plus small clients that behave like a browser
 * (cookies + CSRF header) or a script (Bearer token).
 */
import type { Express } from 'express';
import request from 'supertest';
import type TestAgent from 'supertest/lib/agent';
import { expect } from 'vitest';

import { createApp } from '../../server/app';
import { type Config, loadConfig } from '../../server/config';
import type { AppContext } from '../../server/context';
import { DevMail } from '../../server/models/dev-mail';
import { User } from '../../server/models/user';
import { hashPassword } from '../../server/auth/secrets';
import { startRuntime } from '../../server/runtime';
import { createTestDatabase, type TestDatabase } from './test-database';

export interface TestApp {
  app: Express;
  ctx: AppContext;
  db: TestDatabase;
  /** Stops mail, pools and drops the database. */
  close(): Promise<void>;
}

export const silentLogger = { info: () => undefined, error: () => undefined };

export function testConfig(overrides: Partial<Config> = {}): Config {
  const base = loadConfig({
    NODE_ENV: 'test',
    BCRYPT_ROUNDS: '4',
    DEV_MAIL: '1',
    PUBLIC_URL: 'http://skysieve.test',
  });
  return { ...base, ...overrides };
}

/** Starts an app on a fresh database; pass `db` to share one database between apps of a file. */
export async function startTestApp(overrides: Partial<Config> = {}, shared?: TestDatabase): Promise<TestApp> {
  const db = shared ?? (await createTestDatabase());
  const config = testConfig({ ...overrides, databaseUrl: db.url });
  const runtime = await startRuntime(config, {
    sessionSecret: 'test-session-secret-0123456789',
    logger: silentLogger,
  });
  const built = createApp(runtime.ctx, { clientDirectory: '/nonexistent' });
  return {
    app: built.app,
    ctx: runtime.ctx,
    db,
    async close() {
      await built.close();
      await runtime.close();
      if (!shared) await db.drop();
    },
  };
}

/** A browser-like client: keeps cookies, sends a fresh x-csrf-token with every state-changing request. */
export class BrowserClient {
  readonly agent: TestAgent;
  constructor(readonly app: Express) {
    this.agent = request.agent(app);
  }
  async csrfToken(): Promise<string> {
    const response = await this.agent.get('/api/auth/csrf').expect(200);
    return (response.body as { token: string }).token;
  }
  get(path: string) {
    return this.agent.get(path);
  }
  async post(path: string, body?: object) {
    const token = await this.csrfToken();
    return this.agent
      .post(path)
      .set('x-csrf-token', token)
      .send(body ?? {});
  }
  async patch(path: string, body?: object) {
    const token = await this.csrfToken();
    return this.agent
      .patch(path)
      .set('x-csrf-token', token)
      .send(body ?? {});
  }
  async delete(path: string, body?: object) {
    const token = await this.csrfToken();
    return this.agent
      .delete(path)
      .set('x-csrf-token', token)
      .send(body ?? {});
  }
}

/** A script-like client: `Authorization: Bearer <token>`, no cookies, no CSRF. */
export class TokenClient {
  constructor(
    readonly app: Express,
    readonly token: string,
  ) {}
  get(path: string) {
    return request(this.app).get(path).set('authorization', `Bearer ${this.token}`);
  }
  post(path: string, body?: object) {
    return request(this.app)
      .post(path)
      .set('authorization', `Bearer ${this.token}`)
      .send(body ?? {});
  }
  patch(path: string, body?: object) {
    return request(this.app)
      .patch(path)
      .set('authorization', `Bearer ${this.token}`)
      .send(body ?? {});
  }
  delete(path: string, body?: object) {
    return request(this.app)
      .delete(path)
      .set('authorization', `Bearer ${this.token}`)
      .send(body ?? {});
  }
}

export const testPassword = 'correct-horse-battery';

let userCounter = 0;
/** Inserts an account directly (fast); returns the model. */
export async function createUser(
  ctx: AppContext,
  fields: Partial<Pick<User, 'email' | 'displayName' | 'role' | 'disabled' | 'quotaBytes'>> & {
    password?: string;
  } = {},
): Promise<User> {
  userCounter++;
  return User.query().insertAndFetch({
    email: fields.email ?? `user${userCounter}-${Date.now()}@example.org`,
    displayName: fields.displayName ?? `User ${userCounter}`,
    passwordHash: await hashPassword(fields.password ?? testPassword, ctx.config.bcryptRounds),
    role: fields.role ?? 'member',
    disabled: fields.disabled ?? false,
    quotaBytes: fields.quotaBytes ?? ctx.config.defaultQuotaBytes,
    bytesUsed: 0,
  });
}

/** Signs in through the API and returns the browser client holding the session. */
export async function signIn(app: Express, email: string, password = testPassword): Promise<BrowserClient> {
  const client = new BrowserClient(app);
  const response = await client.post('/api/auth/login', { email, password });
  if (response.status !== 200)
    throw new Error(`Sign-in of ${email} failed: ${response.status} ${JSON.stringify(response.body)}`);
  return client;
}

/** Every message the dev SMTP receiver stored for `address`, oldest first, after pending sends finished. */
export async function mailTo(ctx: AppContext, address: string): Promise<DevMail[]> {
  await ctx.mailer.idle();
  return DevMail.query()
    .whereRaw('lower(envelope_to) like ?', [`%${address.toLowerCase()}%`])
    .orderBy('id');
}

/** The error body the API answers. */
export const apiError = (code: string, message: string) => ({
  error: expect.objectContaining({ code, message }),
});
