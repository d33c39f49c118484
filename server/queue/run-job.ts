/**
 * What a worker does with one run job:
 * 1. claim the run (queued or left running by a lost worker → running, attempts + 1); a cancelled or finished
 *    run is left alone, a run cancelled while queued is marked cancelled;
 * 2. load the image's float32 plane, mask and header and run the fit in a worker thread, writing throttled
 *    progress and watching for a cancel request (the fit is aborted through its AbortSignal);
 * 3. store the results in one transaction (runs/run-results.ts), or record why the run failed or was cancelled;
 * 4. e-mail the run's creator if they asked for it.
 * Engine refusals and the time limit fail the run (retrying would give the same answer); database errors while
 * storing are rethrown so pg-boss retries the job.
 */
import type { Knex } from 'knex';

import type { JointImageOptions } from '../../shared/joint-runs';
import type { RunProgress, RunProvenance } from '../../shared/runs';
import type { AppContext } from '../context';
import type { HeaderCard } from '../engine/io/header-card';
import { readBeam } from '../engine/io/fits-reader';
import { FitCancelledError, runFitInThread } from '../runs/fit-thread';
import { notifyRunFinished } from '../runs/run-mail';
import { storeRunResults } from '../runs/run-results';
import { AppError } from '../http/app-error';
import { bytesToFloat32 } from '../models/run-component';
import { isRetryableFitError, timeLimitMinutes, watchFit } from './fit-watch';

export type WorkerContext = Pick<AppContext, 'config' | 'knex' | 'mailer' | 'logger' | 'version'>;

export interface RunJobOptions {
  /** The fit's time limit. */
  runTimeoutMs: number;
  /** Aborted when the worker shuts down: the run goes back to the queue (the job is retried). */
  shutdown?: AbortSignal;
  /** How often the cancel flag is read and progress written. @default 500 */
  pollMs?: number;
}

export class WorkerShutdownError extends Error {
  constructor() {
    super('The worker shut down before the run finished; it will be run again.');
  }
}

interface ImageInput {
  id: number;
  name: string;
  width: number;
  height: number;
  unit: string | null;
  header: HeaderCard[];
  uploadedById: number | null;
  contentSha256: string;
  pixels: Buffer;
  mask: Buffer;
}

async function loadImage(knex: Knex, imageId: number): Promise<ImageInput | undefined> {
  return (await knex('images')
    .join('image_blobs', 'image_blobs.image_id', 'images.id')
    .where('images.id', imageId)
    .first(
      'images.id',
      'images.name',
      'images.width',
      'images.height',
      'images.unit',
      'images.header',
      'images.uploaded_by_id',
      'images.content_sha256',
      'image_blobs.pixels',
      'image_blobs.mask',
    )) as ImageInput | undefined;
}

/** The stored mask, or null when it is absent (every pixel valid). */
function maskOf(image: ImageInput): Uint8Array | null {
  const mask = new Uint8Array(image.mask);
  return mask.length === image.width * image.height ? mask : null;
}

type JointInputs =
  | { missing: string }
  | {
      others: { position: number; image: ImageInput }[];
      /** By position − 1. */
      options: JointImageOptions[];
    };

/** Images 2…n of a joint run with every image's options (run_images), or why the run cannot start. */
async function loadJointInputs(knex: Knex, runId: number): Promise<JointInputs> {
  const rows = (await knex('run_images').where('runId', runId).orderBy('position').select('*')) as {
    position: number;
    imageId: number;
    options: JointImageOptions;
  }[];
  const others: { position: number; image: ImageInput }[] = [];
  for (const row of rows.filter((r) => r.position > 1)) {
    const image = await loadImage(knex, row.imageId);
    if (!image) return { missing: `Image ${row.position} of this joint run no longer exists.` };
    others.push({ position: row.position, image });
  }
  if (others.length + 1 !== rows.length || others.length < 1) {
    return { missing: 'An input image of this joint run no longer exists.' };
  }
  return {
    others,
    options: rows.map((row) => row.options ?? {}),
  };
}

/** The stored little-endian float32 plane as an aligned Float32Array of its own (transferable). */
function pixelPlane(bytes: Buffer, count: number): Float32Array {
  if (bytes.byteLength !== count * 4) {
    throw new Error(`The stored pixel plane has ${bytes.byteLength} bytes, expected ${count * 4}.`);
  }
  return bytesToFloat32(bytes);
}

async function finish(
  knex: Knex,
  runId: number,
  status: 'failed' | 'cancelled' | 'queued',
  errorMessage: string | null,
): Promise<boolean> {
  const updated = await knex('runs')
    .where('id', runId)
    .where('status', 'running')
    .update({
      status,
      errorMessage,
      finishedAt: status === 'queued' ? null : knex.fn.now(),
      updatedAt: knex.fn.now(),
    });
  return updated > 0;
}

/** Runs (or re-runs) one run job to its end. */
export async function processRunJob(
  ctx: WorkerContext,
  runId: number,
  options: RunJobOptions,
): Promise<void> {
  const { knex } = ctx;
  const claimed = await knex.transaction(async (trx) => {
    const run = (await trx('runs')
      .where('id', runId)
      .forUpdate()
      .first('status', 'cancelRequested', 'imageId', 'requestedSettings', 'kind')) as
      | {
          status: string;
          cancelRequested: boolean;
          imageId: number;
          requestedSettings: unknown;
          kind: 'single' | 'joint';
        }
      | undefined;
    if (!run || (run.status !== 'queued' && run.status !== 'running')) return null;
    if (run.cancelRequested) {
      await trx('runs')
        .where('id', runId)
        .update({ status: 'cancelled', finishedAt: trx.fn.now(), updatedAt: trx.fn.now() });
      return null;
    }
    await trx('runs')
      .where('id', runId)
      .update({
        status: 'running',
        attempts: trx.raw('attempts + 1'),
        startedAt: trx.fn.now(),
        progress: null,
        errorMessage: null,
        updatedAt: trx.fn.now(),
      });
    return run;
  });
  if (!claimed) return;

  const image = await loadImage(knex, claimed.imageId);
  const joint = claimed.kind === 'joint' ? await loadJointInputs(knex, runId) : null;
  if (!image || (joint && 'missing' in joint)) {
    const message = joint && 'missing' in joint ? joint.missing : 'The image of this run no longer exists.';
    if (await finish(knex, runId, 'failed', message)) await notifyRunFinished(ctx, knex, runId);
    return;
  }

  let latest: RunProgress | null = null;
  let written: RunProgress | null = null;
  const watch = watchFit({
    timeoutMs: options.runTimeoutMs,
    shutdown: options.shutdown,
    pollMs: options.pollMs,
    // Writes the latest progress (when it changed), then reads the cancel flag.
    async cancelled() {
      const progress = latest;
      if (progress && progress !== written) {
        await knex('runs')
          .where({ id: runId, status: 'running' })
          .update({ progress: JSON.stringify(progress), updatedAt: knex.fn.now() });
      }
      written = progress;
      const row = (await knex('runs').where('id', runId).first('status', 'cancelRequested')) as
        { status: string; cancelRequested: boolean } | undefined;
      return !row || row.cancelRequested || row.status !== 'running';
    },
    logError: (error) => ctx.logger.error(error),
  });

  const count = image.width * image.height;
  try {
    const mask = new Uint8Array(image.mask);
    const result = await runFitInThread(
      {
        width: image.width,
        height: image.height,
        pixels: pixelPlane(image.pixels, count),
        mask: mask.length === count ? mask : null,
        header: image.header,
        beam: readBeam(image.header),
        unit: image.unit,
        settings: claimed.requestedSettings,
        ...(joint && 'others' in joint
          ? {
              joint: {
                referenceName: image.name,
                others: joint.others.map(({ image: other }) => ({
                  name: other.name,
                  width: other.width,
                  height: other.height,
                  pixels: pixelPlane(other.pixels, other.width * other.height),
                  mask: maskOf(other),
                  header: other.header,
                  beam: readBeam(other.header),
                  unit: other.unit,
                })),
                perImage: joint.options,
                inputSha256: [image.contentSha256, ...joint.others.map((o) => o.image.contentSha256)],
              },
            }
          : {}),
      },
      { signal: watch.signal, onProgress: (p) => (latest = p) },
    );
    watch.stopPolling();
    const provenance: RunProvenance = {
      softwareName: 'Skysieve',
      softwareVersion: ctx.version,
      settingsDigest: result.settingsDigest,
      inputSha256: image.contentSha256,
      inputName: image.name,
      width: image.width,
      height: image.height,
    };
    try {
      const outcome = await storeRunResults(knex, runId, result, provenance, image.uploadedById);
      if (outcome === 'stored') await notifyRunFinished(ctx, knex, runId);
    } catch (error) {
      // Over quota: a person's problem, not the worker's; anything else (database) is retried by pg-boss.
      if (!(error instanceof AppError)) throw error;
      if (await finish(knex, runId, 'failed', `The results could not be stored: ${error.message}`)) {
        await notifyRunFinished(ctx, knex, runId);
      }
    }
  } catch (error) {
    watch.stopPolling();
    if (error instanceof FitCancelledError || watch.signal.aborted) {
      const reason = watch.reason();
      if (reason === 'shutdown') {
        await finish(knex, runId, 'queued', null);
        throw new WorkerShutdownError();
      }
      if (reason === 'timeout') {
        const minutes = timeLimitMinutes(options.runTimeoutMs);
        const message = `The run took longer than the time limit of ${minutes} minutes (RUN_TIMEOUT_MINUTES) and was stopped.`;
        if (await finish(knex, runId, 'failed', message)) await notifyRunFinished(ctx, knex, runId);
        return;
      }
      await finish(knex, runId, 'cancelled', null);
      return;
    }
    if (isRetryableFitError(error)) throw error;
    const message = error instanceof Error ? error.message : String(error);
    if (await finish(knex, runId, 'failed', message)) await notifyRunFinished(ctx, knex, runId);
  } finally {
    watch.dispose();
  }
}

/**
 * Dead-letter handler: a job that used up its retries (its workers kept dying or timing out). A run whose cancel
 * was asked for meanwhile ends cancelled; any other ends failed, with why.
 */
export async function markRunLost(ctx: WorkerContext, runId: number, attempts: number): Promise<void> {
  const { knex } = ctx;
  const message =
    `The run was started ${attempts} times and its worker stopped each time before it finished ` +
    '(the worker process ended or the run exceeded its time limit).';
  const updated = await knex('runs')
    .where('id', runId)
    .whereIn('status', ['queued', 'running'])
    .update({
      status: knex.raw("case when cancel_requested then 'cancelled' else 'failed' end"),
      errorMessage: knex.raw('case when cancel_requested then null else ? end', [message]),
      finishedAt: knex.fn.now(),
      updatedAt: knex.fn.now(),
    });
  if (updated > 0) await notifyRunFinished(ctx, knex, runId);
}
