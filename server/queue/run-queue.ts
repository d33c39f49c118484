/**
 * The separation-run queue on pg-boss 10, in the app's own PostgreSQL (schema `pgboss`).
 *
 * - One queue of run jobs (`data: { runId }`), created before anything is sent (pg-boss 10 needs createQueue).
 * - A job that is active longer than its expiry (RUN_TIMEOUT_MINUTES plus a margin, so the handler's own timeout
 *   fires first) is failed by pg-boss's maintenance and retried: that is how a run whose worker died (kill -9)
 *   is picked up again by another worker.
 * - A job that used up its retries goes to the dead-letter queue, whose handler marks the run failed with why.
 * The server only sends and cancels (no maintenance); workers poll, expire and retry.
 */
import PgBoss from 'pg-boss';

import type { Config } from '../config';
import type { Logger } from '../context';

export const RUN_QUEUE = 'separation-runs';
export const RUN_DEAD_LETTER_QUEUE = 'separation-runs-lost';
export const QUEUE_SCHEMA = 'pgboss';

export interface RunJobData {
  runId: number;
}

export interface RunQueueOptions {
  /** How long a job may stay active before pg-boss fails (and retries) it. @default RUN_TIMEOUT_MINUTES × 60 + 60 */
  expireInSeconds?: number;
  /** Retries after the first attempt. @default 2 */
  retryLimit?: number;
  /** Seconds before a failed job is tried again. @default 5 */
  retryDelaySeconds?: number;
  /** How often a worker expires stale jobs. @default 30 */
  maintenanceIntervalSeconds?: number;
  /** How often a worker polls for jobs (pg-boss's minimum is 0.5). @default 2 */
  pollingIntervalSeconds?: number;
  /** Connections of this instance's pool. @default 4 */
  poolSize?: number;
  /** false for a sender only (the server): no expiry, no maintenance. @default true */
  supervise?: boolean;
}

export interface ResolvedQueueOptions extends Required<RunQueueOptions> {
  /** The fit's own time limit in milliseconds (RUN_TIMEOUT_MINUTES). */
  runTimeoutMs: number;
}

export function resolveQueueOptions(config: Config, options: RunQueueOptions = {}): ResolvedQueueOptions {
  const runTimeoutMs = config.runTimeoutMinutes * 60_000;
  const expireInSeconds = options.expireInSeconds ?? config.runTimeoutMinutes * 60 + 60;
  return {
    expireInSeconds,
    retryLimit: options.retryLimit ?? 2,
    retryDelaySeconds: options.retryDelaySeconds ?? 5,
    maintenanceIntervalSeconds: options.maintenanceIntervalSeconds ?? 30,
    pollingIntervalSeconds: options.pollingIntervalSeconds ?? 2,
    poolSize: options.poolSize ?? 4,
    supervise: options.supervise ?? true,
    // A short expiry (tests) also shortens the fit's own limit, so it always ends before pg-boss expires the job.
    runTimeoutMs: Math.min(runTimeoutMs, Math.max(1, expireInSeconds - 1) * 1000),
  };
}

/** Starts a pg-boss instance on `databaseUrl` and makes sure both queues exist. */
export async function startBoss(
  databaseUrl: string,
  options: ResolvedQueueOptions,
  logger: Logger,
): Promise<PgBoss> {
  const boss = new PgBoss({
    connectionString: databaseUrl,
    schema: QUEUE_SCHEMA,
    max: options.poolSize,
    supervise: options.supervise,
    schedule: false,
    maintenanceIntervalSeconds: options.maintenanceIntervalSeconds,
    application_name: 'skysieve-queue',
  });
  boss.on('error', (error) => logger.error(error));
  await boss.start();
  await boss.createQueue(RUN_DEAD_LETTER_QUEUE, { name: RUN_DEAD_LETTER_QUEUE, retryLimit: 0 });
  await boss.createQueue(RUN_QUEUE, {
    name: RUN_QUEUE,
    retryLimit: options.retryLimit,
    retryDelay: options.retryDelaySeconds,
    expireInSeconds: options.expireInSeconds,
    deadLetter: RUN_DEAD_LETTER_QUEUE,
  });
  return boss;
}

/** The server's side of the queue: send a run, cancel a queued one. */
export class RunQueue {
  constructor(
    readonly boss: PgBoss,
    readonly options: ResolvedQueueOptions,
  ) {}

  /** Queues run `runId`; returns the job id. */
  async send(runId: number): Promise<string> {
    const data: RunJobData = { runId };
    const id = await this.boss.send(RUN_QUEUE, data, {
      retryLimit: this.options.retryLimit,
      retryDelay: this.options.retryDelaySeconds,
      expireInSeconds: this.options.expireInSeconds,
      deadLetter: RUN_DEAD_LETTER_QUEUE,
    });
    if (!id) throw new Error('The run queue did not accept the job.');
    return id;
  }

  async cancel(jobId: string): Promise<void> {
    await this.boss.cancel(RUN_QUEUE, jobId);
  }

  stop(): Promise<void> {
    return this.boss.stop({ graceful: false, wait: true });
  }
}

const queues = new WeakMap<object, { options: RunQueueOptions; queue?: Promise<RunQueue> }>();

/** Queue settings of one app context (tests shorten the expiry); call before the first run is sent. */
export function configureRunQueue(ctx: { config: Config }, options: RunQueueOptions): void {
  queues.set(ctx, { options });
}

/** The app's queue, started on first use. */
export function runQueueOf(ctx: { config: Config; logger: Logger }): Promise<RunQueue> {
  let entry = queues.get(ctx);
  if (!entry) {
    entry = { options: {} };
    queues.set(ctx, entry);
  }
  if (!entry.queue) {
    const { databaseUrl } = ctx.config;
    if (!databaseUrl) return Promise.reject(new Error('DATABASE_URL is not set.'));
    const options = resolveQueueOptions(ctx.config, { supervise: false, poolSize: 2, ...entry.options });
    entry.queue = startBoss(databaseUrl, options, ctx.logger).then((boss) => new RunQueue(boss, options));
    entry.queue.catch(() => {
      if (entry) entry.queue = undefined;
    });
  }
  return entry.queue;
}

/** Stops the app's queue if it was started (server shutdown, end of a test). */
export async function stopRunQueue(ctx: object): Promise<void> {
  const entry = queues.get(ctx);
  queues.delete(ctx);
  if (entry?.queue) await (await entry.queue.catch(() => null))?.stop();
}
