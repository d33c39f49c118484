/**
 * A run worker: pg-boss polling the run queue with `concurrency` parallel handlers (one fit thread each), plus the
 * dead-letter handler. Any number of workers, on any machine, can point at the same database.
 */
import { markRunLost, processRunJob, type WorkerContext } from './run-job';
import { RUN_DEAD_LETTER_QUEUE, RUN_QUEUE, type RunJobData } from './run-queue';
import { type RunWorker, type RunWorkerOptions, startQueueWorker } from './queue-worker';

export type { RunWorker, RunWorkerOptions } from './queue-worker';

export function startRunWorker(ctx: WorkerContext, options: RunWorkerOptions = {}): Promise<RunWorker> {
  return startQueueWorker<RunJobData>(ctx, options, {
    queue: RUN_QUEUE,
    deadLetterQueue: RUN_DEAD_LETTER_QUEUE,
    defaultConcurrency: ctx.config.workerConcurrency,
    process: (data, job) => processRunJob(ctx, data.runId, job),
    lost: (data, attempts) => markRunLost(ctx, data.runId, attempts),
    startedMessage: (concurrency, resolved) =>
      `Run worker started: concurrency ${concurrency}, time limit ${resolved.runTimeoutMs / 60_000} min.`,
  });
}
