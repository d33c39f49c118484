/** Runs the server against DATABASE_URL (migrations must be applied; `npm start` does all of that). */
import { loadConfig } from './config';
import { stopRunQueue } from './queue/run-queue';
import { listen, startRuntime } from './runtime';

const config = loadConfig();
const runtime = await startRuntime(config);
const http = await listen(runtime);
console.log(`Skysieve listening on ${http.url}`);

let stopping = false;
async function stop(): Promise<void> {
  if (stopping) return;
  stopping = true;
  await http.close();
  await stopRunQueue(runtime.ctx);
  await runtime.close();
  process.exit(0);
}
process.on('SIGINT', () => void stop());
process.on('SIGTERM', () => void stop());
