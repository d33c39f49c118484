/**
 * The injection-trial queue: one pg-boss job per trial separation of an injection study (`data: { trialId }`),
 * beside the run queue and with the same rules (server/queue/run-queue.ts): a job active longer than its expiry
 * is failed by pg-boss's maintenance and retried, which is how a trial whose worker was killed is taken up again;
 * a job that used up its retries goes to the dead-letter queue, whose handler fails the trial and its study.
 * The server sends through the run queue's pg-boss instance (no second pool); workers poll with their own.
 */
import type PgBoss from 'pg-boss';

import type { Config } from '../config';
import type { Logger } from '../context';
import { type ResolvedQueueOptions, runQueueOf } from './run-queue';

export const INJECTION_QUEUE = 'injection-trials';
export const INJECTION_DEAD_LETTER_QUEUE = 'injection-trials-lost';

export interface TrialJobData {
  trialId: number;
}

const created = new WeakMap<PgBoss, Promise<void>>();

/**
 * Makes sure both injection queues exist on this pg-boss instance (pg-boss 10 needs createQueue first); once per
 * instance, and concurrent first callers share the one attempt.
 */
export function ensureInjectionQueues(boss: PgBoss, options: ResolvedQueueOptions): Promise<void> {
  let ready = created.get(boss);
  if (!ready) {
    ready = (async () => {
      await boss.createQueue(INJECTION_DEAD_LETTER_QUEUE, {
        name: INJECTION_DEAD_LETTER_QUEUE,
        retryLimit: 0,
      });
      await boss.createQueue(INJECTION_QUEUE, {
        name: INJECTION_QUEUE,
        retryLimit: options.retryLimit,
        retryDelay: options.retryDelaySeconds,
        expireInSeconds: options.expireInSeconds,
        deadLetter: INJECTION_DEAD_LETTER_QUEUE,
      });
    })();
    created.set(boss, ready);
    ready.catch(() => created.delete(boss));
  }
  return ready;
}

/** The server's side: queue trials, withdraw queued ones. */
export async function injectionQueueOf(ctx: { config: Config; logger: Logger }) {
  const runQueue = await runQueueOf(ctx);
  const { boss, options } = runQueue;
  await ensureInjectionQueues(boss, options);
  return {
    async send(trialId: number): Promise<string> {
      const data: TrialJobData = { trialId };
      const id = await boss.send(INJECTION_QUEUE, data, {
        retryLimit: options.retryLimit,
        retryDelay: options.retryDelaySeconds,
        expireInSeconds: options.expireInSeconds,
        deadLetter: INJECTION_DEAD_LETTER_QUEUE,
      });
      if (!id) throw new Error('The injection queue did not accept the job.');
      return id;
    },
    async cancel(jobIds: string[]): Promise<void> {
      if (jobIds.length > 0) await boss.cancel(INJECTION_QUEUE, jobIds);
    },
  };
}
