/**
 * A run worker: pg-boss polling the run queue with `concurrency` parallel handlers (one fit thread each), plus the
 * dead-letter handler. Any number of workers, on any machine, can point at the same database.
 */
import type PgBoss from 'pg-boss';

import {
  RUN_DEAD_LETTER_QUEUE,
  RUN_QUEUE,
  type RunJobData,
  type RunQueueOptions,
  resolveQueueOptions,
  startBoss,
} from './run-queue';
import { markRunLost, processRunJob, type WorkerContext } from './run-job';

export interface RunWorkerOptions extends RunQueueOptions {
  /** Runs at the same time in this process. @default WORKER_CONCURRENCY */
  concurrency?: number;
}

export interface RunWorker {
  boss: PgBoss;
  /** Stops polling; running fits are aborted and their runs go back to the queue. */
  stop(): Promise<void>;
}

export async function startRunWorker(ctx: WorkerContext, options: RunWorkerOptions = {}): Promise<RunWorker> {
  const databaseUrl = ctx.config.databaseUrl;
  if (!databaseUrl)
    throw new Error('DATABASE_URL is not set: the worker needs the database the server uses.');
  const resolved = resolveQueueOptions(ctx.config, options);
  const boss = await startBoss(databaseUrl, resolved, ctx.logger);
  const shutdown = new AbortController();
  const concurrency = options.concurrency ?? ctx.config.workerConcurrency;
  for (let i = 0; i < concurrency; i++) {
    await boss.work<RunJobData>(
      RUN_QUEUE,
      { batchSize: 1, pollingIntervalSeconds: resolved.pollingIntervalSeconds },
      async (jobs) => {
        for (const job of jobs) {
          await processRunJob(ctx, job.data.runId, {
            runTimeoutMs: resolved.runTimeoutMs,
            shutdown: shutdown.signal,
          });
        }
      },
    );
  }
  await boss.work<RunJobData>(
    RUN_DEAD_LETTER_QUEUE,
    { batchSize: 1, pollingIntervalSeconds: resolved.pollingIntervalSeconds, includeMetadata: true },
    async (jobs) => {
      for (const job of jobs) await markRunLost(ctx, job.data.runId, resolved.retryLimit + 1);
    },
  );
  ctx.logger.info(
    `Run worker started: concurrency ${concurrency}, time limit ${resolved.runTimeoutMs / 60_000} min.`,
  );
  return {
    boss,
    async stop() {
      shutdown.abort();
      await boss.stop({ graceful: true, wait: true, timeout: 15_000 });
    },
  };
}
