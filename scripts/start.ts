/**
 * npm start: PostgreSQL (own cluster in .data/pg unless DATABASE_URL is set), migrations, demo seed,
 * admin bootstrap, client build when stale, then the app on one port. Ctrl-C stops server and database.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync, statSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

import { ConfigError, loadConfig } from '../server/config';
import { type LocalCluster, readOrCreateSecret, startLocalCluster } from '../server/db/local-cluster';
import { findPostgresBinaries, runningAsRoot } from '../server/db/postgres-cluster';
import { prepareDatabase } from '../server/db/prepare';
import { demoAccounts, demoProject } from '../server/db/seed';
import { listen, startRuntime } from '../server/runtime';

const root = fileURLToPath(new URL('..', import.meta.url));
process.chdir(root);

function fail(message: string): never {
  console.error(`\n[start] ${message}`);
  process.exit(1);
}

/** Newest modification time of a file or of any file below a folder (0 when missing). */
function newestMtime(target: string): number {
  if (!existsSync(target)) return 0;
  const stat = statSync(target);
  if (!stat.isDirectory()) return stat.mtimeMs;
  let newest = stat.mtimeMs;
  for (const entry of readdirSync(target)) newest = Math.max(newest, newestMtime(path.join(target, entry)));
  return newest;
}

function buildClientIfStale(): void {
  if (!existsSync('index.html')) {
    console.log('[start] No index.html: skipping the client build (API only).');
    return;
  }
  const built = newestMtime('dist/index.html');
  const sources = Math.max(...['src', 'index.html', 'shared', 'public', 'vite.config.ts'].map(newestMtime));
  if (built >= sources) {
    console.log('[start] Client build is up to date.');
    return;
  }
  console.log('[start] Building the client (vite build)…');
  const result = spawnSync('npx', ['vite', 'build'], { stdio: 'inherit' });
  if (result.status !== 0) fail('The client build failed (see above).');
}

function ensurePostgresInstalled() {
  let binaries = findPostgresBinaries();
  if (binaries) return binaries;
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
  binaries = findPostgresBinaries();
  if (!binaries) fail('postgresql was installed but /usr/lib/postgresql/*/bin/initdb is still missing.');
  return binaries;
}

let config;
try {
  config = loadConfig();
} catch (error) {
  if (error instanceof ConfigError) fail(error.message);
  throw error;
}

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
  console.log(
    `[start] PostgreSQL ${binaries.version} on 127.0.0.1:${config.pgPort} (${cluster.created ? 'new cluster' : cluster.startedHere ? 'existing cluster' : 'already running'} in ${path.join(config.dataDir, 'pg')})`,
  );
}

/** Stops the local cluster; an adopted one (already running before) only once this start has served. */
async function stopDatabase(options: { evenIfAdopted: boolean } = { evenIfAdopted: false }): Promise<void> {
  if (cluster && (cluster.startedHere || options.evenIfAdopted)) {
    await cluster
      .stop()
      .catch((error: unknown) => console.error('[start] Stopping PostgreSQL failed:', error));
    console.log('[start] PostgreSQL stopped.');
  }
}

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
  buildClientIfStale();
} catch (error) {
  await stopDatabase();
  fail(`Preparing the database failed: ${error instanceof Error ? error.message : String(error)}`);
}

const sessionSecret =
  config.sessionSecret ?? readOrCreateSecret(path.join(config.dataDir, 'session-secret'), 32);
const runtime = await startRuntime({ ...config, databaseUrl }, { sessionSecret });
let http: Awaited<ReturnType<typeof listen>>;
try {
  http = await listen(runtime);
} catch (error) {
  await runtime.close();
  await stopDatabase();
  fail(
    `Could not listen on ${config.host}:${config.port}: ${error instanceof Error ? error.message : String(error)}`,
  );
}

console.log(`\nSkysieve is running at ${http.url}\n`);
console.log('Demo accounts (project "%s"):', demoProject.name);
for (const account of demoAccounts) {
  const role =
    account.role === 'admin' ? 'administrator' : `${account.projectRole ?? 'member'} of the demo project`;
  console.log(`  ${account.email.padEnd(32)} password ${account.password.padEnd(22)} ${role}`);
}
if (config.devMail) console.log('\nE-mail goes to the development inbox (sign in as admin → Admin → Mail).');
console.log('Press Ctrl-C to stop.\n');

let stopping = false;
async function shutdown(signal: string): Promise<void> {
  if (stopping) return;
  stopping = true;
  console.log(`\n[start] ${signal}: stopping…`);
  await http.close().catch(() => undefined);
  await runtime.close().catch(() => undefined);
  await stopDatabase({ evenIfAdopted: true });
  process.exit(0);
}
process.on('SIGINT', () => void shutdown('SIGINT'));
process.on('SIGTERM', () => void shutdown('SIGTERM'));
