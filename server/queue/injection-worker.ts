/**
 * An injection-trial worker: pg-boss polling the trial queue with `concurrency` parallel handlers (one fit thread
 * each) and the trial dead-letter handler. `npm run worker` starts one beside the run worker (server/worker.ts).
 */
import { processTrialJob, markTrialLost } from '../injection/trial-job';
import {
  INJECTION_DEAD_LETTER_QUEUE,
  INJECTION_QUEUE,
  type TrialJobData,
  ensureInjectionQueues,
} from './injection-queue';
import type { WorkerContext } from './run-job';
import { resolveQueueOptions, startBoss } from './run-queue';
import type { RunWorker, RunWorkerOptions } from './run-worker';

export async function startInjectionWorker(
  ctx: WorkerContext,
  options: RunWorkerOptions = {},
): Promise<RunWorker> {
  const databaseUrl = ctx.config.databaseUrl;
  if (!databaseUrl)
    throw new Error('DATABASE_URL is not set: the worker needs the database the server uses.');
  const resolved = resolveQueueOptions(ctx.config, options);
  const boss = await startBoss(databaseUrl, resolved, ctx.logger);
  await ensureInjectionQueues(boss, resolved);
  const shutdown = new AbortController();
  // One trial at a time unless asked: a study queues many short separations and the run worker shares the cores.
  const concurrency = options.concurrency ?? 1;
  for (let i = 0; i < concurrency; i++) {
    await boss.work<TrialJobData>(
      INJECTION_QUEUE,
      { batchSize: 1, pollingIntervalSeconds: resolved.pollingIntervalSeconds },
      async (jobs) => {
        for (const job of jobs) {
          await processTrialJob(ctx, job.data.trialId, {
            runTimeoutMs: resolved.runTimeoutMs,
            shutdown: shutdown.signal,
          });
        }
      },
    );
  }
  await boss.work<TrialJobData>(
    INJECTION_DEAD_LETTER_QUEUE,
    { batchSize: 1, pollingIntervalSeconds: resolved.pollingIntervalSeconds },
    async (jobs) => {
      for (const job of jobs) await markTrialLost(ctx, job.data.trialId, resolved.retryLimit + 1);
    },
  );
  ctx.logger.info(`Injection-trial worker started: concurrency ${concurrency}.`);
  return {
    boss,
    async stop() {
      shutdown.abort();
      await boss.stop({ graceful: true, wait: true, timeout: 15_000 });
    },
  };
}
