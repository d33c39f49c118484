/**
 * After a trial ends: bring its study up to date in one transaction under the study's row lock, so two workers
 * finishing the last two trials at once cannot both aggregate (or neither).
 * - a failed trial fails the study with the trial's message; the other trials are cancelled (queued ones at
 *   once, running ones when their worker next looks);
 * - every trial ended and a cancel was asked for → cancelled;
 * - every trial succeeded → the results are aggregated (aggregate-study.ts) and stored with status succeeded;
 * - otherwise only the progress (trials done) is written.
 */
import type { Knex } from 'knex';

import { resolveSettings } from '../../shared/separation-settings';
import { fluxUnits } from '../catalogue/catalogue-table';
import type { HeaderCard } from '../engine/io/header-card';
import { psfFwhmPx } from '../engine/psf';
import type { TrialRecovered } from '../models/injection-trial';
import { aggregateStudy } from './aggregate-study';
import { fluxErrorPerSigma, runPsf } from './injection-plan';
import { surveyArea } from './survey-area';

interface TrialRow {
  trialIndex: number;
  status: string;
  errorMessage: string | null;
  recovered: TrialRecovered | null;
}

interface StudyRow {
  id: number;
  runId: number;
  status: string;
  cancelRequested: boolean;
  fluxes: number[];
  levelKind: string;
}

async function aggregateInto(trx: Knex.Transaction, study: StudyRow, trials: TrialRow[]) {
  const run = (await trx('runs')
    .join('images', 'images.id', 'runs.image_id')
    .join('image_blobs', 'image_blobs.image_id', 'images.id')
    .where('runs.id', study.runId)
    .first(
      'runs.settings',
      'runs.diagnostics',
      'images.width',
      'images.height',
      'images.header',
      'images.unit',
      'image_blobs.mask',
    )) as
    | {
        settings: unknown;
        diagnostics: { noise: { sigma: number | null } } | null;
        width: number;
        height: number;
        header: HeaderCard[];
        unit: string | null;
        mask: Buffer;
      }
    | undefined;
  if (!run) throw new Error('The run of this study no longer exists.');
  const known = (await trx('run_sources').where('runId', study.runId).select('x', 'y', 'snr')) as {
    x: number;
    y: number;
    snr: number;
  }[];
  const psf = runPsf(run, run.settings);
  const fwhm = psfFwhmPx(psf);
  const sigma = run.diagnostics?.noise.sigma ?? null;
  const perSigma = fluxErrorPerSigma(psf);
  return aggregateStudy({
    fluxes: study.fluxes,
    snrs: study.fluxes.map((flux) => (sigma !== null && sigma > 0 ? flux / (sigma * perSigma) : null)),
    trials: trials.map((trial) => trial.recovered),
    knownSources: known,
    knownRadiusPixels: Math.max(1.5, fwhm.major),
    threshold: resolveSettings(run.settings).threshold,
    area: surveyArea(run.width, run.height, new Uint8Array(run.mask), run.header),
    noiseSigma: sigma,
    psfFwhmPx: fwhm,
    fluxUnit: fluxUnits(run.unit ?? '').flux,
  });
}

export async function settleStudy(knex: Knex, studyId: number): Promise<void> {
  await knex.transaction(async (trx) => {
    const study = (await trx('injection_studies')
      .where('id', studyId)
      .forUpdate()
      .first('id', 'runId', 'status', 'cancelRequested', 'fluxes', 'levelKind')) as StudyRow | undefined;
    if (!study || (study.status !== 'queued' && study.status !== 'running')) return;
    const trials = (await trx('injection_trials')
      .where('studyId', studyId)
      .orderBy('trialIndex')
      .select('trialIndex', 'status', 'errorMessage', 'recovered')) as TrialRow[];
    const ended = trials.filter((t) => t.status !== 'queued' && t.status !== 'running').length;
    const failed = trials.find((t) => t.status === 'failed');
    const now = trx.fn.now();
    if (failed) {
      await trx('injection_studies')
        .where('id', studyId)
        .update({
          status: 'failed',
          cancelRequested: true,
          trialsDone: ended,
          errorMessage: `Trial ${failed.trialIndex + 1} of ${trials.length} failed: ${failed.errorMessage ?? 'no reason given'}`,
          finishedAt: now,
          updatedAt: now,
        });
      await trx('injection_trials')
        .where({ studyId, status: 'queued' })
        .update({ status: 'cancelled', finishedAt: now, updatedAt: now });
      return;
    }
    if (ended < trials.length) {
      await trx('injection_studies').where('id', studyId).update({ trialsDone: ended, updatedAt: now });
      return;
    }
    if (study.cancelRequested || trials.some((t) => t.status === 'cancelled')) {
      await trx('injection_studies')
        .where('id', studyId)
        .update({ status: 'cancelled', trialsDone: ended, finishedAt: now, updatedAt: now });
      return;
    }
    const results = await aggregateInto(trx, study, trials);
    await trx('injection_studies')
      .where('id', studyId)
      .update({
        status: 'succeeded',
        trialsDone: ended,
        results: JSON.stringify(results),
        errorMessage: null,
        finishedAt: now,
        updatedAt: now,
      });
  });
}
