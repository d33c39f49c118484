/**
 * npm start: PostgreSQL (own cluster in .data/pg unless DATABASE_URL is set), migrations, demo seed,
 * admin bootstrap, client build when stale, then the app on one port with one separation worker.
 * Ctrl-C stops worker, server and database.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync, statSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

import { startInjectionWorker } from '../server/queue/injection-worker';
import { startRunWorker } from '../server/queue/run-worker';
import { stopRunQueue } from '../server/queue/run-queue';
import { listen, startRuntime } from '../server/runtime';
import { bootDatabase, fail, printDemoAccounts, readConfig } from './lib/boot';

process.chdir(fileURLToPath(new URL('..', import.meta.url)));

/** Newest modification time of a file or of any file below a folder (0 when missing). */
function newestMtime(target: string): number {
  if (!existsSync(target)) return 0;
  const stat = statSync(target);
  if (!stat.isDirectory()) return stat.mtimeMs;
  let newest = stat.mtimeMs;
  for (const entry of readdirSync(target)) newest = Math.max(newest, newestMtime(path.join(target, entry)));
  return newest;
}

/** Runs `vite build` when dist/ is missing or older than the client sources. Returns false if it failed. */
function buildClientIfStale(skip: boolean): boolean {
  if (skip) {
    console.log('[start] SKIP_CLIENT_BUILD is set: serving dist/ as it is.');
    return true;
  }
  if (!existsSync('index.html')) {
    console.log('[start] No index.html: skipping the client build (API only).');
    return true;
  }
  const built = newestMtime('dist/index.html');
  const sources = Math.max(...['src', 'index.html', 'shared', 'public', 'vite.config.ts'].map(newestMtime));
  if (built >= sources) {
    console.log('[start] Client build is up to date.');
    return true;
  }
  console.log('[start] Building the client (vite build)…');
  return spawnSync('npx', ['vite', 'build'], { stdio: 'inherit' }).status === 0;
}

const config = readConfig();
const database = await bootDatabase(config);
if (!buildClientIfStale(config.skipClientBuild)) {
  await database.stop();
  fail('The client build failed (see above).');
}

const runtime = await startRuntime(
  { ...config, databaseUrl: database.databaseUrl },
  { sessionSecret: database.sessionSecret },
);
let http: Awaited<ReturnType<typeof listen>>;
try {
  http = await listen(runtime);
} catch (error) {
  await runtime.close();
  await database.stop();
  fail(
    `Could not listen on ${config.host}:${config.port}: ${error instanceof Error ? error.message : String(error)}`,
  );
}

// One separation worker alongside the server; more run elsewhere with `npm run worker`.
const worker = await startRunWorker(runtime.ctx);
// And one worker for injection-study trials (completeness), one trial at a time.
const injectionWorker = await startInjectionWorker(runtime.ctx);

console.log(`\nSkysieve is running at ${http.url}\n`);
printDemoAccounts();
if (config.devMail) console.log('\nE-mail goes to the development inbox (sign in as admin → Admin → Mail).');
console.log('Press Ctrl-C to stop.\n');

let stopping = false;
async function shutdown(signal: string): Promise<void> {
  if (stopping) return;
  stopping = true;
  console.log(`\n[start] ${signal}: stopping…`);
  await http.close().catch(() => undefined);
  await worker.stop().catch(() => undefined);
  await injectionWorker.stop().catch(() => undefined);
  await stopRunQueue(runtime.ctx).catch(() => undefined);
  await runtime.close().catch(() => undefined);
  await database.stop({ evenIfAdopted: true });
  process.exit(0);
}
process.on('SIGINT', () => void shutdown('SIGINT'));
process.on('SIGTERM', () => void shutdown('SIGTERM'));
