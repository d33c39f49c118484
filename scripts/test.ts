/**
 * npm test: a throwaway PostgreSQL in a temp folder on a free loopback port, a migrated template
 * database, then every vitest project (client, node, e2e as vite.config.ts defines them).
 * The cluster is stopped and removed whatever happens (failure, Ctrl-C). Extra arguments go to vitest,
 * e.g. `npm test -- tests/server/auth.test.ts`.
 *
 * Test files get: DATABASE_URL (a migrated database of their own to share), SKYSIEVE_TEST_POSTGRES_URL
 * (superuser URL) and SKYSIEVE_TEST_TEMPLATE_DATABASE (a migrated template for CREATE DATABASE … TEMPLATE);
 * tests/support/test-database.ts uses them.
 */
import { spawn, type ChildProcess } from 'node:child_process';

import pg from 'pg';

import { createKnex, migrateLatest } from '../server/db/knex';
import { createThrowawayCluster, type ThrowawayCluster } from '../server/db/throwaway-cluster';

const templateDatabase = 'skysieve_template';
const sharedDatabase = 'skysieve_test';
const started = Date.now();
const seconds = () => ((Date.now() - started) / 1000).toFixed(1);

let cluster: ThrowawayCluster | undefined;
let child: ChildProcess | undefined;
let cleaning: Promise<void> | undefined;

function cleanUp(): Promise<void> {
  cleaning ??= (async () => {
    if (cluster) {
      try {
        await cluster.destroy();
        console.log(`[test] PostgreSQL stopped and ${cluster.dataDir} removed.`);
      } catch (error) {
        console.error(`[test] Could not stop or remove the test cluster in ${cluster.dataDir}:`, error);
      }
    }
  })();
  return cleaning;
}

for (const signal of ['SIGINT', 'SIGTERM'] as const) {
  process.on(signal, () => {
    console.log(`\n[test] ${signal}: stopping tests and the test database…`);
    child?.kill(signal);
    void cleanUp().then(() => process.exit(130));
  });
}

async function createDatabase(url: string, name: string, template?: string): Promise<void> {
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  try {
    await client.query(`create database ${name}${template ? ` template ${template}` : ''}`);
  } finally {
    await client.end();
  }
}

async function main(): Promise<number> {
  cluster = await createThrowawayCluster('skysieve-test-pg-');
  console.log(
    `[test] PostgreSQL ${cluster.binaries.version} on 127.0.0.1:${cluster.port} in ${cluster.dataDir} (${seconds()} s)`,
  );
  await createDatabase(cluster.url(), templateDatabase);
  const knex = createKnex(cluster.url(templateDatabase), { min: 0, max: 1 });
  try {
    const applied = await migrateLatest(knex);
    console.log(`[test] ${applied.length} migrations applied to the template database (${seconds()} s)`);
  } finally {
    await knex.destroy();
  }
  await createDatabase(cluster.url(), sharedDatabase, templateDatabase);

  const env = {
    ...process.env,
    DATABASE_URL: cluster.url(sharedDatabase),
    SKYSIEVE_TEST_POSTGRES_URL: cluster.url(),
    SKYSIEVE_TEST_TEMPLATE_DATABASE: templateDatabase,
  };
  const args = ['vitest', 'run', ...process.argv.slice(2)];
  console.log(`[test] npx ${args.join(' ')}`);
  const code = await new Promise<number>((resolve) => {
    child = spawn('npx', args, { stdio: 'inherit', env });
    child.on('error', (error) => {
      console.error('[test] Could not run vitest:', error);
      resolve(1);
    });
    child.on('close', (exitCode, signal) => resolve(exitCode ?? (signal ? 1 : 0)));
  });
  return code;
}

let exitCode = 1;
try {
  exitCode = await main();
} catch (error) {
  console.error(
    '[test] Setting up the test database failed:',
    error instanceof Error ? error.message : error,
  );
} finally {
  await cleanUp();
}
console.log(
  exitCode === 0
    ? `[test] PASSED: every suite passed (${seconds()} s).`
    : `[test] FAILED: exit code ${exitCode} (${seconds()} s). See the vitest output above.`,
);
process.exit(exitCode);
