/**
 * An injection-trial worker: pg-boss polling the trial queue with `concurrency` parallel handlers (one fit thread
 * each) and the trial dead-letter handler. `npm run worker` starts one beside the run worker (server/worker.ts).
 */
import { markTrialLost, processTrialJob } from '../injection/trial-job';
import {
  INJECTION_DEAD_LETTER_QUEUE,
  INJECTION_QUEUE,
  type TrialJobData,
  ensureInjectionQueues,
} from './injection-queue';
import { type RunWorker, type RunWorkerOptions, startQueueWorker } from './queue-worker';
import type { WorkerContext } from './run-job';

export function startInjectionWorker(ctx: WorkerContext, options: RunWorkerOptions = {}): Promise<RunWorker> {
  return startQueueWorker<TrialJobData>(ctx, options, {
    queue: INJECTION_QUEUE,
    deadLetterQueue: INJECTION_DEAD_LETTER_QUEUE,
    // One trial at a time unless asked: a study queues many short separations and the run worker shares the cores.
    defaultConcurrency: 1,
    prepare: ensureInjectionQueues,
    process: (data, job) => processTrialJob(ctx, data.trialId, job),
    lost: (data, attempts) => markTrialLost(ctx, data.trialId, attempts),
    startedMessage: (concurrency) => `Injection-trial worker started: concurrency ${concurrency}.`,
  });
}
