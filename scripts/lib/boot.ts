/**
 * Shared by `npm start` and `npm run dev`: read the config, get a database (DATABASE_URL, or the local
 * cluster in .data/pg, installing Debian's postgresql first when root), migrate, seed, bootstrap the admin.
 */
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import path from 'node:path';

import { type Config, ConfigError, loadConfig } from '../../server/config';
import { type LocalCluster, readOrCreateSecret, startLocalCluster } from '../../server/db/local-cluster';
import { findPostgresBinaries, type PostgresBinaries, runningAsRoot } from '../../server/db/postgres-cluster';
import { prepareDatabase } from '../../server/db/prepare';
import { demoAccounts, demoProject } from '../../server/db/seed';

export function fail(message: string): never {
  console.error(`\n[start] ${message}`);
  process.exit(1);
}

/** Reads the configuration; a `.env` file in the project folder fills in variables not set in the environment. */
export function readConfig(): Config {
  if (existsSync('.env')) {
    // Node's loader keeps variables that are already set.
    process.loadEnvFile('.env');
    console.log('[start] Read settings from .env');
  }
  try {
    return loadConfig();
  } catch (error) {
    if (error instanceof ConfigError) fail(error.message);
    throw error;
  }
}

export function ensurePostgresInstalled(): PostgresBinaries {
  const found = findPostgresBinaries();
  if (found) return found;
  if (!runningAsRoot()) {
    fail(
      "PostgreSQL's server is not installed. Install it, then run npm start again:\n\n    sudo apt-get update && sudo apt-get install -y postgresql\n\n(or set DATABASE_URL to use an existing PostgreSQL database).",
    );
  }
  console.log("[start] Installing Debian's postgresql package (apt-get)…");
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  for (const args of [['update'], ['install', '-y', 'postgresql']]) {
    const result = spawnSync('apt-get', args, { stdio: 'inherit', env });
    if (result.status !== 0) fail(`apt-get ${args.join(' ')} failed.`);
  }
  const installed = findPostgresBinaries();
  if (!installed) fail('postgresql was installed but /usr/lib/postgresql/*/bin/initdb is still missing.');
  return installed;
}

export interface BootedDatabase {
  databaseUrl: string;
  sessionSecret: string;
  /** Stops the local cluster if this process runs it (`evenIfAdopted`: also one found already running). */
  stop(options?: { evenIfAdopted: boolean }): Promise<void>;
}

export async function bootDatabase(config: Config): Promise<BootedDatabase> {
  let cluster: LocalCluster | undefined;
  let databaseUrl = config.databaseUrl;
  if (databaseUrl) {
    console.log('[start] Using the database in DATABASE_URL (no local PostgreSQL started).');
  } else {
    const binaries = ensurePostgresInstalled();
    try {
      cluster = await startLocalCluster(binaries, config.dataDir, config.pgPort);
    } catch (error) {
      fail(`Could not start PostgreSQL: ${error instanceof Error ? error.message : String(error)}`);
    }
    databaseUrl = cluster.databaseUrl;
    const state = cluster.created
      ? 'new cluster'
      : cluster.startedHere
        ? 'existing cluster'
        : 'already running';
    console.log(
      `[start] PostgreSQL ${binaries.version} on 127.0.0.1:${config.pgPort} (${state} in ${path.join(config.dataDir, 'pg')})`,
    );
  }
  const stop = async (options = { evenIfAdopted: false }) => {
    if (cluster && (cluster.startedHere || options.evenIfAdopted)) {
      await cluster
        .stop()
        .catch((error: unknown) => console.error('[start] Stopping PostgreSQL failed:', error));
      console.log('[start] PostgreSQL stopped.');
    }
  };
  try {
    const prepared = await prepareDatabase(databaseUrl, config, { seed: true });
    console.log(`[start] Migrations: ${prepared.appliedMigrations.length} applied now.`);
    if (prepared.seed) {
      const { createdUsers, createdProject, createdMemberships } = prepared.seed;
      const changed = createdUsers + createdMemberships + (createdProject ? 1 : 0);
      console.log(
        `[start] Demo seed: ${changed === 0 ? 'already present' : `${createdUsers} accounts, ${createdProject ? 1 : 0} project, ${createdMemberships} memberships created`}.`,
      );
    }
    if (prepared.admin !== 'not configured')
      console.log(`[start] Admin ${config.adminEmail}: ${prepared.admin}.`);
  } catch (error) {
    await stop();
    fail(`Preparing the database failed: ${error instanceof Error ? error.message : String(error)}`);
  }
  const sessionSecret =
    config.sessionSecret ?? readOrCreateSecret(path.join(config.dataDir, 'session-secret'), 32);
  return { databaseUrl, sessionSecret, stop };
}

export function printDemoAccounts(): void {
  console.log('Demo accounts (project "%s"):', demoProject.name);
  for (const account of demoAccounts) {
    const role =
      account.role === 'admin' ? 'administrator' : `${account.projectRole ?? 'member'} of the demo project`;
    console.log(`  ${account.email.padEnd(32)} password ${account.password.padEnd(22)} ${role}`);
  }
}
