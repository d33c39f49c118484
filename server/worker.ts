/**
 * `npm run worker`: a run worker process against DATABASE_URL (the server's database, possibly on another
 * machine). Concurrency from WORKER_CONCURRENCY, time limit from RUN_TIMEOUT_MINUTES. SIGINT/SIGTERM stop it
 * cleanly (running runs go back to the queue); after kill -9 its jobs expire and another worker takes them.
 * Options: --concurrency N, --poll-seconds S (≥ 0.5), --maintenance-seconds S (how often stale jobs are expired).
 */
import { parseArgs } from 'node:util';

import { loadConfig } from './config';
import { consoleLogger } from './context';
import { startInjectionWorker } from './queue/injection-worker';
import { startRunWorker } from './queue/run-worker';
import { startRuntime } from './runtime';

async function main(): Promise<void> {
  const config = loadConfig();
  if (!config.databaseUrl) {
    throw new Error('DATABASE_URL is not set: point the worker at the database the server uses.');
  }
  // The worker serves no sessions; the runtime only insists on a secret of some length.
  const runtime = await startRuntime(config, {
    sessionSecret: config.sessionSecret ?? 'worker-process-has-no-sessions',
    logger: consoleLogger,
  });
  const { values } = parseArgs({
    options: {
      concurrency: { type: 'string' },
      'poll-seconds': { type: 'string' },
      'maintenance-seconds': { type: 'string' },
    },
  });
  const number = (name: string, text: string | undefined, min: number): number | undefined => {
    if (text === undefined) return undefined;
    const value = Number(text);
    if (!Number.isFinite(value) || value < min)
      throw new Error(`--${name} must be a number ≥ ${min}, got "${text}".`);
    return value;
  };
  const queueOptions = {
    pollingIntervalSeconds: number('poll-seconds', values['poll-seconds'], 0.5),
    maintenanceIntervalSeconds: number('maintenance-seconds', values['maintenance-seconds'], 1),
  };
  const runWorker = await startRunWorker(runtime.ctx, {
    concurrency: number('concurrency', values.concurrency, 1),
    ...queueOptions,
  });
  // Injection-study trials (one separation each), one at a time beside the runs.
  const injectionWorker = await startInjectionWorker(runtime.ctx, queueOptions);
  const worker = { stop: () => Promise.all([runWorker.stop(), injectionWorker.stop()]) };
  let stopping = false;
  const stop = (signal: string) => {
    if (stopping) return;
    stopping = true;
    consoleLogger.info(`Run worker: ${signal}, stopping.`);
    void worker
      .stop()
      .then(() => runtime.close())
      .then(() => process.exit(0))
      .catch((error: unknown) => {
        consoleLogger.error(error);
        process.exit(1);
      });
  };
  process.on('SIGINT', () => stop('SIGINT'));
  process.on('SIGTERM', () => stop('SIGTERM'));
}

main().catch((error: unknown) => {
  console.error(error instanceof Error ? error.message : error);
  process.exit(1);
});
