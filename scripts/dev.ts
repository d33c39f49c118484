/**
 * npm run dev: the same database start as `npm start`, the API on PORT (default 8080) and Vite's dev
 * server with hot reload on http://127.0.0.1:5173 (it proxies /api to the API; see vite.config.ts).
 * The API does not reload itself: restart `npm run dev` after server changes.
 */
import { spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';

import { listen, startRuntime } from '../server/runtime';
import { bootDatabase, fail, printDemoAccounts, readConfig } from './lib/boot';

process.chdir(fileURLToPath(new URL('..', import.meta.url)));

const config = readConfig();
const database = await bootDatabase(config);
const runtime = await startRuntime(
  { ...config, databaseUrl: database.databaseUrl },
  { sessionSecret: database.sessionSecret },
);
let http: Awaited<ReturnType<typeof listen>>;
try {
  http = await listen(runtime, { clientDirectory: '/nonexistent' });
} catch (error) {
  await runtime.close();
  await database.stop();
  fail(
    `Could not listen on ${config.host}:${config.port}: ${error instanceof Error ? error.message : String(error)}`,
  );
}
console.log(`[dev] API on ${http.url}`);
const vite = spawn('npx', ['vite'], { stdio: 'inherit', env: { ...process.env, PORT: String(config.port) } });
printDemoAccounts();

let stopping = false;
async function shutdown(): Promise<void> {
  if (stopping) return;
  stopping = true;
  vite.kill('SIGTERM');
  await http.close().catch(() => undefined);
  await runtime.close().catch(() => undefined);
  await database.stop({ evenIfAdopted: true });
  process.exit(0);
}
vite.on('exit', () => void shutdown());
process.on('SIGINT', () => void shutdown());
process.on('SIGTERM', () => void shutdown());
