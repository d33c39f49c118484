/**
 * What a worker does with one injection trial:
 * 1. claim the trial (queued, or left running by a lost worker → running, attempts + 1); a trial of a study that
 *    is cancelled or already finished is marked cancelled instead;
 * 2. build the trial image from the stored float32 plane: with the artificial sources added (the run's PSF,
 *    catalogue/completeness.ts injectSources), or, for the false-source trial, minus the run's compact component;
 * 3. separate it with the run's resolved settings in a fit thread (runs/fit-thread.ts), watching for a cancel;
 * 4. match what was found to what was injected and store the trial's outcome; when it was the study's last
 *    trial, aggregate every trial into the study row in the same transaction (injection.service settleStudy).
 *
 * The false-source trial. The image minus PSF ⊛ (the run's compact field) holds the diffuse emission and the
 * noise only; every catalogue entry the same settings find there, away from the subtracted sources, is a false
 * source. Entries within one FWHM of a subtracted source are residuals of the subtraction (the original run had
 * them inside that source), counted apart. This holds for Gaussian and Poisson noise alike, unlike searching the
 * negated image (which needs symmetric noise and no positive diffuse field). Subtracting also removes the
 * pedestal q/α of the compact prior, a level far below σ that the diffuse field takes up again in the new fit.
 *
 * Errors: engine refusals and the time limit fail the trial (retrying would give the same answer) and with it the
 * study, with the message; a worker shutdown puts the trial back in the queue; database errors are rethrown so
 * pg-boss retries the job. Nothing here lets an error escape to crash the worker.
 */
import type { Knex } from 'knex';

import type { PixelPoint } from '../catalogue/completeness';
import { injectSources, matchInjected } from '../catalogue/completeness';
import type { HeaderCard } from '../engine/io/header-card';
import { readBeam } from '../engine/io/fits-reader';
import { bytesToFloat32 } from '../models/run-component';
import type { InjectedSource } from '../catalogue/completeness';
import type { TrialRecovered } from '../models/injection-trial';
import type { WorkerContext } from '../queue/run-job';
import { WorkerShutdownError } from '../queue/run-job';
import { isRetryableFitError, timeLimitMinutes, watchFit } from '../queue/fit-watch';
import { FitCancelledError, runFitInThread } from '../runs/fit-thread';
import { runPsf } from './injection-plan';
import { settleStudy } from './settle-study';

export interface TrialJobOptions {
  runTimeoutMs: number;
  shutdown?: AbortSignal;
  /** How often the cancel flag is read. @default 500 */
  pollMs?: number;
}

interface ClaimedTrial {
  id: number;
  studyId: number;
  kind: 'injection' | 'false-source';
  injected: InjectedSource[];
  runId: number;
  matchRadiusPixels: number;
}

async function claim(knex: Knex, trialId: number): Promise<ClaimedTrial | null | 'cancelled'> {
  return knex.transaction(async (trx) => {
    const trial = (await trx('injection_trials')
      .where('id', trialId)
      .forUpdate()
      .first('id', 'studyId', 'kind', 'status', 'injected')) as
      (Omit<ClaimedTrial, 'runId' | 'matchRadiusPixels'> & { status: string }) | undefined;
    if (!trial || (trial.status !== 'queued' && trial.status !== 'running')) return null;
    const study = (await trx('injection_studies')
      .where('id', trial.studyId)
      .forUpdate()
      .first('status', 'cancelRequested', 'runId', 'matchRadiusPixels')) as
      { status: string; cancelRequested: boolean; runId: number; matchRadiusPixels: number } | undefined;
    if (!study) return null;
    if (study.cancelRequested || (study.status !== 'queued' && study.status !== 'running')) {
      await trx('injection_trials')
        .where('id', trialId)
        .update({ status: 'cancelled', finishedAt: trx.fn.now(), updatedAt: trx.fn.now() });
      return 'cancelled';
    }
    await trx('injection_trials')
      .where('id', trialId)
      .update({
        status: 'running',
        attempts: trx.raw('attempts + 1'),
        startedAt: trx.fn.now(),
        errorMessage: null,
        updatedAt: trx.fn.now(),
      });
    if (study.status === 'queued') {
      await trx('injection_studies')
        .where('id', trial.studyId)
        .update({ status: 'running', startedAt: trx.fn.now(), updatedAt: trx.fn.now() });
    }
    return { ...trial, runId: study.runId, matchRadiusPixels: study.matchRadiusPixels };
  });
}

interface TrialInputs {
  width: number;
  height: number;
  unit: string | null;
  header: HeaderCard[];
  pixels: Buffer;
  mask: Buffer;
  settings: unknown;
  compact: Buffer | null;
  known: PixelPoint[];
}

async function loadInputs(knex: Knex, runId: number, withCompact: boolean): Promise<TrialInputs | undefined> {
  const row = (await knex('runs')
    .join('images', 'images.id', 'runs.image_id')
    .join('image_blobs', 'image_blobs.image_id', 'images.id')
    .where('runs.id', runId)
    .first(
      'images.width',
      'images.height',
      'images.unit',
      'images.header',
      'image_blobs.pixels',
      'image_blobs.mask',
      'runs.settings',
    )) as Omit<TrialInputs, 'compact' | 'known'> | undefined;
  if (!row) return undefined;
  const known = (await knex('run_sources').where('runId', runId).select('x', 'y')) as PixelPoint[];
  let compact: Buffer | null = null;
  if (withCompact) {
    const plane = (await knex('run_components').where({ runId, name: 'compact' }).first('data')) as
      { data: Buffer } | undefined;
    if (!plane) return undefined;
    compact = plane.data;
  }
  return { ...row, compact, known };
}

async function endTrial(
  knex: Knex,
  trialId: number,
  status: 'failed' | 'cancelled' | 'queued',
  errorMessage: string | null,
): Promise<void> {
  await knex('injection_trials')
    .where({ id: trialId, status: 'running' })
    .update({
      status,
      errorMessage,
      finishedAt: status === 'queued' ? null : knex.fn.now(),
      updatedAt: knex.fn.now(),
    });
}

/** The trial image: the stored plane with the artificial sources added, or minus the compact component. */
function trialImage(inputs: TrialInputs, trial: ClaimedTrial, mask: Uint8Array | null): Float32Array {
  const count = inputs.width * inputs.height;
  if (inputs.pixels.byteLength !== count * 4) {
    throw new Error(`The stored pixel plane has ${inputs.pixels.byteLength} bytes, expected ${count * 4}.`);
  }
  const plane = bytesToFloat32(inputs.pixels);
  if (trial.kind === 'false-source') {
    const compact = bytesToFloat32(inputs.compact!);
    if (compact.length !== count)
      throw new Error("The run's compact component does not match the image size.");
    for (let i = 0; i < count; i++) plane[i] = plane[i]! - compact[i]!;
    return plane;
  }
  const psf = runPsf(inputs, inputs.settings);
  return Float32Array.from(
    injectSources(plane, inputs.width, inputs.height, trial.injected, psf, mask ?? undefined),
  );
}

/** Runs (or re-runs) one trial job to its end. */
export async function processTrialJob(
  ctx: WorkerContext,
  trialId: number,
  options: TrialJobOptions,
): Promise<void> {
  const { knex } = ctx;
  const claimed = await claim(knex, trialId);
  if (claimed === null || claimed === 'cancelled') {
    // Also for a trial that had already ended: its worker may have stopped between storing it and bringing the
    // study up to date, and settling is idempotent.
    const row = (await knex('injection_trials').where('id', trialId).first('studyId')) as
      { studyId: number } | undefined;
    if (row) await settleStudy(knex, row.studyId);
    return;
  }
  const failTrial = async (message: string) => {
    await knex.transaction(async (trx) => {
      await endTrial(trx, trialId, 'failed', message);
      await settleStudy(trx, claimed.studyId);
    });
  };

  const inputs = await loadInputs(knex, claimed.runId, claimed.kind === 'false-source');
  if (!inputs) return failTrial('The run, its image or its compact component no longer exists.');

  const watch = watchFit({
    timeoutMs: options.runTimeoutMs,
    shutdown: options.shutdown,
    pollMs: options.pollMs,
    async cancelled() {
      const row = (await knex('injection_studies')
        .join('injection_trials', 'injection_trials.study_id', 'injection_studies.id')
        .where('injection_trials.id', trialId)
        .first('injection_studies.cancelRequested', 'injection_trials.status')) as
        { cancelRequested: boolean; status: string } | undefined;
      return !row || row.cancelRequested || row.status !== 'running';
    },
    logError: (error) => ctx.logger.error(error),
  });

  try {
    const count = inputs.width * inputs.height;
    const maskBytes = new Uint8Array(inputs.mask);
    const mask = maskBytes.length === count ? maskBytes : null;
    const pixels = trialImage(inputs, claimed, mask);
    const result = await runFitInThread(
      {
        width: inputs.width,
        height: inputs.height,
        pixels,
        mask: mask ? Uint8Array.from(mask) : null,
        header: inputs.header,
        beam: readBeam(inputs.header),
        unit: inputs.unit,
        settings: inputs.settings,
      },
      { signal: watch.signal },
    );
    watch.stopPolling();
    const fwhm = result.diagnostics.psfFwhmPx.major;
    let recovered: TrialRecovered;
    if (claimed.kind === 'injection') {
      const match = matchInjected(claimed.injected, result.catalogue, inputs.known, {
        radiusPixels: claimed.matchRadiusPixels,
        knownRadiusPixels: Math.max(1.5, fwhm),
      });
      recovered = { kind: 'injection', ...match, detections: result.catalogue.length };
    } else {
      recovered = {
        kind: 'false-source',
        found: result.catalogue.map((s) => ({ x: s.x, y: s.y, snr: s.snr, flux: s.flux })),
        detections: result.catalogue.length,
      };
    }
    // The trial's outcome and the study's update (the aggregate, when it was the last trial) in one transaction.
    await knex.transaction(async (trx) => {
      await trx('injection_trials')
        .where({ id: trialId, status: 'running' })
        .update({
          status: 'succeeded',
          recovered: JSON.stringify(recovered),
          errorMessage: null,
          finishedAt: trx.fn.now(),
          updatedAt: trx.fn.now(),
        });
      await settleStudy(trx, claimed.studyId);
    });
  } catch (error) {
    watch.stopPolling();
    if (error instanceof FitCancelledError || watch.signal.aborted) {
      const reason = watch.reason();
      if (reason === 'shutdown') {
        await endTrial(knex, trialId, 'queued', null);
        throw new WorkerShutdownError();
      }
      if (reason === 'timeout') {
        const minutes = timeLimitMinutes(options.runTimeoutMs);
        return failTrial(
          `The trial separation took longer than the time limit of ${minutes} minutes and was stopped.`,
        );
      }
      await knex.transaction(async (trx) => {
        await endTrial(trx, trialId, 'cancelled', null);
        await settleStudy(trx, claimed.studyId);
      });
      return;
    }
    if (isRetryableFitError(error)) throw error;
    await failTrial(error instanceof Error ? error.message : String(error));
  } finally {
    watch.dispose();
  }
}

/** Dead-letter handler: the trial's workers kept dying; the trial and its study fail with why. */
export async function markTrialLost(ctx: WorkerContext, trialId: number, attempts: number): Promise<void> {
  const { knex } = ctx;
  const row = (await knex('injection_trials').where('id', trialId).first('studyId')) as
    { studyId: number } | undefined;
  if (!row) return;
  await knex.transaction(async (trx) => {
    await trx('injection_trials')
      .where('id', trialId)
      .whereIn('status', ['queued', 'running'])
      .update({
        status: 'failed',
        errorMessage:
          `The trial was started ${attempts} times and its worker stopped each time before it finished ` +
          '(the worker process ended or the trial exceeded its time limit).',
        finishedAt: trx.fn.now(),
        updatedAt: trx.fn.now(),
      });
    await settleStudy(trx, row.studyId);
  });
}
