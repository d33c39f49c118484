/**
 * A pg-boss worker for one job queue: `concurrency` parallel handlers (one fit thread each) and the handler of its
 * dead-letter queue; stopping it aborts the running jobs through their shutdown signal (they go back to the
 * queue) and waits for the handlers. The run worker and the injection-trial worker are two of these.
 */
import type PgBoss from 'pg-boss';

import type { WorkerContext } from './run-job';
import { type ResolvedQueueOptions, type RunQueueOptions, resolveQueueOptions, startBoss } from './run-queue';

export interface RunWorkerOptions extends RunQueueOptions {
  /** Jobs at the same time in this process. @default the worker's own default */
  concurrency?: number;
}

export interface RunWorker {
  boss: PgBoss;
  /** Stops polling; running fits are aborted and their jobs go back to the queue. */
  stop(): Promise<void>;
}

export interface QueueWorkerSpec<Data extends object> {
  queue: string;
  deadLetterQueue: string;
  /** Handlers when the options give no concurrency. */
  defaultConcurrency: number;
  /** Creates the queues, where the worker's own module does not do it in startBoss. */
  prepare?: (boss: PgBoss, resolved: ResolvedQueueOptions) => Promise<void>;
  /** Runs one job to its end. */
  process: (data: Data, job: { runTimeoutMs: number; shutdown: AbortSignal }) => Promise<void>;
  /** A job that used up its retries (started `attempts` times). */
  lost: (data: Data, attempts: number) => Promise<void>;
  /** The line logged once the worker polls. */
  startedMessage: (concurrency: number, resolved: ResolvedQueueOptions) => string;
}

export async function startQueueWorker<Data extends object>(
  ctx: WorkerContext,
  options: RunWorkerOptions,
  spec: QueueWorkerSpec<Data>,
): Promise<RunWorker> {
  const databaseUrl = ctx.config.databaseUrl;
  if (!databaseUrl)
    throw new Error('DATABASE_URL is not set: the worker needs the database the server uses.');
  const resolved = resolveQueueOptions(ctx.config, options);
  const boss = await startBoss(databaseUrl, resolved, ctx.logger);
  await spec.prepare?.(boss, resolved);
  const shutdown = new AbortController();
  const concurrency = options.concurrency ?? spec.defaultConcurrency;
  const workOptions = { batchSize: 1, pollingIntervalSeconds: resolved.pollingIntervalSeconds };
  for (let i = 0; i < concurrency; i++) {
    await boss.work<Data>(spec.queue, workOptions, async (jobs) => {
      for (const job of jobs) {
        await spec.process(job.data, { runTimeoutMs: resolved.runTimeoutMs, shutdown: shutdown.signal });
      }
    });
  }
  await boss.work<Data>(spec.deadLetterQueue, workOptions, async (jobs) => {
    for (const job of jobs) await spec.lost(job.data, resolved.retryLimit + 1);
  });
  ctx.logger.info(spec.startedMessage(concurrency, resolved));
  return {
    boss,
    async stop() {
      shutdown.abort();
      await boss.stop({ graceful: true, wait: true, timeout: 15_000 });
    },
  };
}
