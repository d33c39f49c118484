// @vitest-environment node
/**
 * What `npm start` does, against fresh databases: migrate + seed + admin bootstrap twice changes
 * nothing the second time; the admin bootstrap creates, keeps and re-promotes; migrations go down and
 * up again; and the cluster helpers really create, start and stop PostgreSQL in a temp folder.
 */
import { mkdtempSync, rmSync, statSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';

import knexFactory, { type Knex } from 'knex';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { checkPassword } from '../../server/auth/secrets';
import { createKnex, migrateLatest, migrateRollbackAll } from '../../server/db/knex';
import { startLocalCluster } from '../../server/db/local-cluster';
import {
  clusterExists,
  findPostgresBinaries,
  portIsOpen,
  findFreePort,
} from '../../server/db/postgres-cluster';
import { prepareDatabase } from '../../server/db/prepare';
import { demoAccounts, demoProject } from '../../server/db/seed';
import { createThrowawayCluster } from '../../server/db/throwaway-cluster';
import { createEmptyDatabase, type TestDatabase } from '../support/test-database';
import { testConfig } from '../support/test-app';

const tables = [
  'users',
  'projects',
  'memberships',
  'invitations',
  'api_tokens',
  'password_resets',
  'audit_events',
  'dev_mail',
  'session',
];

async function rowCounts(knex: Knex): Promise<Record<string, number>> {
  const counts: Record<string, number> = {};
  for (const table of tables) {
    const row = (await knex(table).count({ n: '*' }).first()) as { n: number | string };
    counts[table] = Number(row.n);
  }
  return counts;
}

describe('start path: migrate, seed, admin bootstrap', () => {
  let db: TestDatabase;
  let knex: Knex;
  beforeAll(async () => {
    db = await createEmptyDatabase('start');
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
  });
  afterAll(async () => {
    await knex.destroy();
    await db.drop();
  });

  it('is idempotent: the second start applies no migration and changes no row', async () => {
    const config = testConfig({
      adminEmail: 'first-admin@example.org',
      adminPassword: 'first-admin-password',
    });
    const first = await prepareDatabase(db.url, config, { seed: true });
    expect(first.appliedMigrations.length).toBeGreaterThanOrEqual(8);
    expect(first.seed).toEqual({ createdUsers: 3, createdProject: true, createdMemberships: 2 });
    expect(first.admin).toBe('created');
    const countsAfterFirst = await rowCounts(knex);
    expect(countsAfterFirst.users).toBe(4);
    expect(countsAfterFirst.projects).toBe(1);
    expect(countsAfterFirst.memberships).toBe(2);

    const second = await prepareDatabase(db.url, config, { seed: true });
    expect(second).toEqual({
      appliedMigrations: [],
      seed: { createdUsers: 0, createdProject: false, createdMemberships: 0 },
      admin: 'unchanged',
    });
    expect(await rowCounts(knex)).toEqual(countsAfterFirst);
  });

  it('seeds the demo accounts with the printed passwords and the demo project with its roles', async () => {
    for (const account of demoAccounts) {
      const user = await knex('users').whereRaw('lower(email) = ?', [account.email]).first();
      expect(user, account.email).toBeDefined();
      expect(user.role).toBe(account.role);
      expect(await checkPassword(account.password, user.password_hash)).toBe(true);
      const membership = await knex('memberships')
        .join('projects', 'projects.id', 'memberships.project_id')
        .where({ 'memberships.user_id': user.id, 'projects.name': demoProject.name })
        .first();
      expect(membership?.role ?? null).toBe(account.projectRole);
    }
  });

  it('bootstraps the configured admin: created with that password, re-promoted and re-enabled if changed', async () => {
    const admin = await knex('users').where({ email: 'first-admin@example.org' }).first();
    expect(admin.role).toBe('admin');
    expect(await checkPassword('first-admin-password', admin.password_hash)).toBe(true);
    await knex('users').where({ id: admin.id }).update({ role: 'member', disabled: true });
    const config = testConfig({ adminEmail: 'First-Admin@example.org', adminPassword: 'another-password-x' });
    expect((await prepareDatabase(db.url, config, { seed: true })).admin).toBe('promoted');
    const after = await knex('users').where({ id: admin.id }).first();
    expect(after).toMatchObject({ role: 'admin', disabled: false });
    // The password of an existing account is left alone.
    expect(await checkPassword('first-admin-password', after.password_hash)).toBe(true);
    const events = await knex('audit_events').where({ action: 'user.bootstrapped', target_id: admin.id });
    expect(events).toHaveLength(2);
    expect((await prepareDatabase(db.url, testConfig(), { seed: false })).admin).toBe('not configured');
  });
});

describe('migrations', () => {
  it('roll back completely (each down reverses its up) and apply again', async () => {
    const db = await createEmptyDatabase('migrations');
    const knex = createKnex(db.url, { min: 0, max: 1 });
    const userTables = async () =>
      (
        await knex.raw<{ rows: { tablename: string }[] }>(
          "select tablename from pg_tables where schemaname = 'public' order by 1",
        )
      ).rows.map((row) => row.tablename);
    try {
      const applied = await migrateLatest(knex);
      expect((await userTables()).filter((name) => tables.includes(name)).sort()).toEqual([...tables].sort());
      await migrateRollbackAll(knex);
      expect(await userTables()).toEqual(['knex_migrations', 'knex_migrations_lock']);
      const indexes = await knex.raw<{ rows: unknown[] }>(
        "select indexname from pg_indexes where schemaname = 'public' and tablename not like 'knex%'",
      );
      expect(indexes.rows).toEqual([]);
      expect(await migrateLatest(knex)).toEqual(applied);
    } finally {
      await knex.destroy();
      await db.drop();
    }
  });
  it('gives every foreign key an index', async () => {
    const db = await createEmptyDatabase('fk');
    const knex = createKnex(db.url, { min: 0, max: 1 });
    try {
      await migrateLatest(knex);
      // Foreign keys whose first column does not lead any index of their table.
      const result = await knex.raw<{ rows: { constraint: string }[] }>(`
        select c.conname as constraint from pg_constraint c
        where c.contype = 'f' and not exists (
          select 1 from pg_index i where i.indrelid = c.conrelid and i.indkey[0] = c.conkey[1])`);
      expect(result.rows).toEqual([]);
      const noAction = await knex.raw<{ rows: { conname: string }[] }>(
        "select conname from pg_constraint where contype = 'f' and confdeltype not in ('c', 'n')",
      );
      expect(noAction.rows).toEqual([]);
    } finally {
      await knex.destroy();
      await db.drop();
    }
  });
});

describe('PostgreSQL cluster helpers', () => {
  it('finds the Debian server binaries', () => {
    const binaries = findPostgresBinaries();
    expect(binaries?.initdb).toMatch(/^\/usr\/lib\/postgresql\/\d+\/bin\/initdb$/);
    expect(findPostgresBinaries('/nonexistent')).toBeNull();
  });
  it('creates, starts and stops a throwaway cluster in a temp folder and removes it', async () => {
    const cluster = await createThrowawayCluster('skysieve-helper-test-');
    try {
      expect(clusterExists(cluster.dataDir)).toBe(true);
      const client = new pg.Client({ connectionString: cluster.url() });
      await client.connect();
      const { rows } = await client.query<{ address: string | null }>(
        'select inet_server_addr()::text as address',
      );
      await client.end();
      expect(rows[0]?.address).toMatch(/^127\.0\.0\.1/);
    } finally {
      await cluster.destroy();
    }
    expect(await portIsOpen(cluster.port)).toBe(false);
    expect(() => statSync(cluster.dataDir)).toThrow();
  });
  it("runs npm start's persistent cluster: password-protected app role, reused on the next start", async () => {
    const binaries = findPostgresBinaries();
    if (!binaries) throw new Error('PostgreSQL binaries missing');
    const root = mkdtempSync(path.join(os.tmpdir(), 'skysieve-local-cluster-'));
    const port = await findFreePort();
    try {
      const first = await startLocalCluster(binaries, root, port);
      expect(first).toMatchObject({ created: true, startedHere: true });
      expect(first.databaseUrl).toMatch(
        new RegExp(`^postgresql://skysieve:[^@]+@127\\.0\\.0\\.1:${port}/skysieve$`),
      );
      const client = new pg.Client({ connectionString: first.databaseUrl });
      await client.connect();
      expect((await client.query<{ user: string }>('select current_user as user')).rows[0]?.user).toBe(
        'skysieve',
      );
      await client.end();
      const wrong = new pg.Client({
        connectionString: first.databaseUrl.replace(/:[^:@]+@/, ':wrong-password@'),
      });
      await expect(wrong.connect()).rejects.toThrow(/password authentication failed/);
      await first.stop();
      expect(await portIsOpen(port)).toBe(false);

      const second = await startLocalCluster(binaries, root, port);
      expect(second).toMatchObject({ created: false, startedHere: true, databaseUrl: first.databaseUrl });
      await second.stop();
    } finally {
      rmSync(root, { recursive: true, force: true });
    }
  });
});
