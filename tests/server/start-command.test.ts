// @vitest-environment node
/**
 * The real `npm start` script (scripts/start.ts) in a child process against a fresh database given by
 * DATABASE_URL: it migrates, seeds, bootstraps the admin, serves the API, prints the URL and the demo
 * accounts, and exits cleanly on SIGTERM. A second start changes nothing.
 */
import { type ChildProcess, spawn } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { findFreePort } from '../../server/db/postgres-cluster';
import { demoAccounts } from '../../server/db/seed';
import { createEmptyDatabase, type TestDatabase } from '../support/test-database';

const root = fileURLToPath(new URL('../..', import.meta.url));

interface Started {
  child: ChildProcess;
  output: () => string;
  url: string;
}

async function start(db: TestDatabase): Promise<Started> {
  const port = await findFreePort();
  const child = spawn(path.join(root, 'node_modules', '.bin', 'tsx'), ['scripts/start.ts'], {
    cwd: root,
    env: {
      ...process.env,
      DATABASE_URL: db.url,
      PORT: String(port),
      SKIP_CLIENT_BUILD: '1',
      BCRYPT_ROUNDS: '4',
      SESSION_SECRET: 'start-command-test-secret-0123',
      SKYSIEVE_ADMIN_EMAIL: 'ops@example.org',
      SKYSIEVE_ADMIN_PASSWORD: 'ops-password-123',
    },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let text = '';
  child.stdout?.on('data', (chunk: Buffer) => (text += chunk.toString()));
  child.stderr?.on('data', (chunk: Buffer) => (text += chunk.toString()));
  const url = await new Promise<string>((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`start did not come up in 60 s:\n${text}`)), 60_000);
    const check = () => {
      const match = /Skysieve is running at (http:\/\/\S+)/.exec(text);
      if (match?.[1] && text.includes('Press Ctrl-C to stop.')) {
        clearTimeout(timer);
        resolve(match[1]);
      }
    };
    child.stdout?.on('data', check);
    child.on('exit', (code) => {
      clearTimeout(timer);
      reject(new Error(`start exited with ${code}:\n${text}`));
    });
  });
  return { child, output: () => text, url };
}

function stop(started: Started): Promise<number | null> {
  return new Promise((resolve) => {
    started.child.removeAllListeners('exit');
    started.child.on('exit', (code) => resolve(code));
    // tsx relays the signal to the script and exits with its code.
    started.child.kill('SIGTERM');
  });
}

let db: TestDatabase;
beforeAll(async () => {
  db = await createEmptyDatabase('startcmd');
});
afterAll(async () => {
  await db.drop();
});

describe('npm start (scripts/start.ts)', () => {
  it('prepares the database, serves the API with the demo accounts, and stops on SIGTERM; twice', async () => {
    const first = await start(db);
    try {
      expect(first.output()).toContain(
        '[start] Using the database in DATABASE_URL (no local PostgreSQL started).',
      );
      expect(first.output()).toMatch(/\[start\] Migrations: \d+ applied now\./);
      expect(first.output()).toContain('[start] Demo seed: 3 accounts, 1 project, 2 memberships created.');
      expect(first.output()).toContain('[start] Admin ops@example.org: created.');
      for (const account of demoAccounts) expect(first.output()).toContain(`${account.email}`);
      for (const account of demoAccounts) expect(first.output()).toContain(account.password);
      const health = await request(first.url).get('/api/health').expect(200);
      expect(health.body).toMatchObject({ status: 'ok', database: 'ok' });
      // Sign in as the demo astronomer with the printed password and see the demo project.
      const agent = request.agent(first.url);
      const { token } = (await agent.get('/api/auth/csrf')).body as { token: string };
      const astro = demoAccounts.find((account) => account.email.startsWith('astro'))!;
      await agent.post('/api/auth/login').set('x-csrf-token', token).send(astro).expect(200);
      const projects = (await agent.get('/api/projects').expect(200)).body as {
        name: string;
        myRole: string;
      }[];
      expect(projects).toEqual([expect.objectContaining({ name: 'Lyra Deep Field', myRole: 'owner' })]);
    } finally {
      expect(await stop(first)).toBe(0);
    }
    expect(first.output()).toContain('[start] SIGTERM: stopping…');

    const second = await start(db);
    try {
      expect(second.output()).toContain('[start] Migrations: 0 applied now.');
      expect(second.output()).toContain('[start] Demo seed: already present.');
      expect(second.output()).toContain('[start] Admin ops@example.org: unchanged.');
    } finally {
      expect(await stop(second)).toBe(0);
    }
  });
});
