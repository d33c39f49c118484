/**
 * A fresh, migrated database per test file, copied from the template `npm test` migrated
 * (CREATE DATABASE … TEMPLATE), so test files run in parallel without seeing each other's rows.
 */
import { randomBytes } from 'node:crypto';

import pg from 'pg';

export interface TestDatabase {
  name: string;
  url: string;
  drop(): Promise<void>;
}

export const testRunnerMessage =
  'These tests need PostgreSQL: run them through `npm test` (e.g. `npm test -- tests/server`), which starts a throwaway cluster and sets SKYSIEVE_TEST_POSTGRES_URL and SKYSIEVE_TEST_TEMPLATE_DATABASE.';

export function testPostgresUrl(database = 'postgres'): string {
  // Tests read the runner's settings directly: they are not part of the app's configuration.
  const base = process.env.SKYSIEVE_TEST_POSTGRES_URL;
  if (!base) throw new Error(testRunnerMessage);
  const url = new URL(base);
  url.pathname = `/${database}`;
  return url.toString();
}

async function withSuperuser<T>(work: (client: pg.Client) => Promise<T>): Promise<T> {
  const client = new pg.Client({ connectionString: testPostgresUrl() });
  await client.connect();
  try {
    return await work(client);
  } finally {
    await client.end();
  }
}

/** An empty database (no migrations), e.g. for the migration and start-path tests. */
export async function createEmptyDatabase(prefix = 'empty'): Promise<TestDatabase> {
  return createDatabase(prefix, undefined);
}

/** A migrated copy of the template database. */
export async function createTestDatabase(prefix = 'test'): Promise<TestDatabase> {
  const template = process.env.SKYSIEVE_TEST_TEMPLATE_DATABASE;
  if (!template) throw new Error(testRunnerMessage);
  return createDatabase(prefix, template);
}

async function createDatabase(prefix: string, template: string | undefined): Promise<TestDatabase> {
  const name = `skysieve_${prefix}_${randomBytes(5).toString('hex')}`;
  await withSuperuser(async (client) => {
    // Two files copying the template at the same moment can collide ("being accessed by other users"): retry.
    for (let attempt = 0; ; attempt++) {
      try {
        await client.query(`create database ${name}${template ? ` template ${template}` : ''}`);
        return;
      } catch (error) {
        if (attempt >= 20 || !String(error).includes('being accessed by other users')) throw error;
        await new Promise((resolve) => setTimeout(resolve, 100 + Math.random() * 200));
      }
    }
  });
  return {
    name,
    url: testPostgresUrl(name),
    drop: () =>
      withSuperuser(
        async (client) => void (await client.query(`drop database if exists ${name} with (force)`)),
      ),
  };
}
