/** What `npm start` does to a database before serving: migrate, seed the demo, bootstrap the admin. */
import type { Config } from '../config';
import { type AdminBootstrap, ensureAdmin, seedDemo, type SeedResult } from './seed';
import { createKnex, migrateLatest } from './knex';

export interface PrepareResult {
  appliedMigrations: string[];
  seed: SeedResult | null;
  admin: AdminBootstrap;
}

export async function prepareDatabase(
  databaseUrl: string,
  config: Config,
  options: { seed: boolean },
): Promise<PrepareResult> {
  const knex = createKnex(databaseUrl, { min: 0, max: 2 });
  try {
    const appliedMigrations = await migrateLatest(knex);
    const seed = options.seed ? await seedDemo(knex, config) : null;
    const admin = await ensureAdmin(knex, config);
    return { appliedMigrations, seed, admin };
  } finally {
    await knex.destroy();
  }
}
