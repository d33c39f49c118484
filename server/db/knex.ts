/**
 * Knex and Objection set-up shared by the server, the start and test scripts and the tests.
 * Migrations are TypeScript files in migrations/, loaded with our own dynamic import so they run
 * the same under tsx and under vitest.
 */
import { readdir } from 'node:fs/promises';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

import knexFactory, { type Knex } from 'knex';
import { knexSnakeCaseMappers, Model } from 'objection';
import pg from 'pg';

// bigint (int8) columns and count(*) come back as JS numbers; byte counts stay far below 2^53.
pg.types.setTypeParser(pg.types.builtins.INT8, (value) => Number.parseInt(value, 10));

export const migrationsDirectory = fileURLToPath(new URL('../../migrations', import.meta.url));

interface MigrationModule {
  up(knex: Knex): Promise<void>;
  down(knex: Knex): Promise<void>;
}

/** Lists migrations/*.ts in name order (YYYYMMDDHHmm-verb-noun.ts sorts by time). */
class TypeScriptMigrationSource implements Knex.MigrationSource<string> {
  async getMigrations(): Promise<string[]> {
    const names = await readdir(migrationsDirectory);
    return names.filter((name) => /^\d{12}-[a-z0-9-]+\.ts$/.test(name)).sort();
  }
  getMigrationName(migration: string): string {
    return migration;
  }
  async getMigration(migration: string): Promise<MigrationModule> {
    const url = pathToFileURL(path.join(migrationsDirectory, migration)).href;
    return (await import(url)) as MigrationModule;
  }
}

export const migrationConfig: Knex.MigratorConfig = {
  migrationSource: new TypeScriptMigrationSource(),
  tableName: 'knex_migrations',
};

/** A Knex instance with camelCase ↔ snake_case mapping, bound to Objection's Model. */
export function createKnex(
  databaseUrl: string,
  pool: { min: number; max: number } = { min: 0, max: 10 },
): Knex {
  const knex = knexFactory({
    client: 'pg',
    connection: databaseUrl,
    pool,
    ...knexSnakeCaseMappers(),
  });
  Model.knex(knex);
  return knex;
}

/** Runs every pending migration; returns the names applied now (empty when up to date). */
export async function migrateLatest(knex: Knex): Promise<string[]> {
  const [, applied] = (await knex.migrate.latest(migrationConfig)) as [number, string[]];
  return applied;
}

/** Rolls every migration back (used by the migration round-trip test). */
export async function migrateRollbackAll(knex: Knex): Promise<void> {
  await knex.migrate.rollback(migrationConfig, true);
}

/** True when the database answers a trivial query within `timeoutMs`. */
export async function databaseIsUp(knex: Knex, timeoutMs = 2000): Promise<boolean> {
  let timer: NodeJS.Timeout | undefined;
  const timeout = new Promise<boolean>((resolve) => {
    timer = setTimeout(() => resolve(false), timeoutMs);
  });
  const query = knex.raw('select 1').then(
    () => true,
    () => false,
  );
  try {
    return await Promise.race([query, timeout]);
  } finally {
    clearTimeout(timer);
  }
}
