/**
 * Injection studies of a run: start one (plan, store the study and its trials in one transaction, queue one job
 * per trial), read them, cancel or delete one, export its tables; and the run's differential number counts,
 * corrected with a finished study's completeness.
 */
import type { Knex } from 'knex';

import {
  type CreateInjectionStudyOutput,
  type InjectionStudy as InjectionStudyBody,
  type InjectionStudyDetail,
  type NumberCounts,
  type NumberCountsQuery,
  COMPLETENESS_CAUTION_TEXT,
  isTerminalInjectionStatus,
} from '../../shared/injection';
import { type CatalogueProvenance, type CatalogueTable } from '../catalogue/catalogue-table';
import { fluxUnits } from '../catalogue/catalogue-table';
import { type LevelResult } from '../catalogue/completeness';
import { catalogueProvenance, type Download, tableDownload } from '../catalogue/downloads';
import { DEG2_PER_SR, numberCounts } from '../catalogue/number-counts';
import { completenessToTable, falseSourcesToTable, numberCountsToTable } from '../catalogue/result-tables';
import type { AppContext } from '../context';
import type { HeaderCard } from '../engine/io/header-card';
import { AppError, conflict, notFound } from '../http/app-error';
import { isoDate, isoDateOrNull } from '../models/base-model';
import { InjectionStudy } from '../models/injection-study';
import { InjectionTrial } from '../models/injection-trial';
import type { Run } from '../models/run';
import { injectionQueueOf } from '../queue/injection-queue';
import { planStudy } from './injection-plan';
import { surveyArea } from './survey-area';

export const studyNotFoundMessage = 'Injection study not found.';

export function toStudyBody(study: InjectionStudy): InjectionStudyBody {
  return {
    id: study.id,
    runId: study.runId,
    createdBy: study.createdBy,
    levelKind: study.levelKind,
    levels: study.levels,
    fluxes: study.fluxes,
    sourcesPerLevel: study.sourcesPerLevel,
    seed: Number(study.seed),
    radiusPixels: study.radiusPixels,
    matchRadiusPixels: study.matchRadiusPixels,
    status: study.status,
    cancelRequested: study.cancelRequested,
    trialsTotal: study.trialsTotal,
    trialsDone: study.trialsDone,
    errorMessage: study.errorMessage,
    results: study.results,
    createdAt: isoDate(study.createdAt),
    startedAt: isoDateOrNull(study.startedAt),
    finishedAt: isoDateOrNull(study.finishedAt),
    caution: COMPLETENESS_CAUTION_TEXT,
  };
}

function requireSucceededRun(run: Run): void {
  if (run.status !== 'succeeded') {
    throw conflict(
      `Run ${run.id} is ${run.status}; completeness can be measured once the run has succeeded (its settings, ` +
        'detected sources and compact component are needed).',
    );
  }
  if (run.kind === 'joint') {
    // The trials re-run a single-image fit: on a joint run that would measure another fit than the catalogue's.
    throw new AppError(
      'unprocessable',
      `Run ${run.id} is a joint run of several images; injection studies measure the completeness of ` +
        'single-image runs only. Measure it on a single-image run of the reference image.',
    );
  }
}

interface StudyImageRow {
  width: number;
  height: number;
  header: HeaderCard[];
  unit: string | null;
  name: string;
  contentSha256: string;
  beam: { majorArcsec: number; minorArcsec: number; paDeg: number } | null;
  mask: Buffer;
}

async function runImage(knex: Knex, run: Run): Promise<StudyImageRow> {
  const image = (await knex('images')
    .join('image_blobs', 'image_blobs.image_id', 'images.id')
    .where('images.id', run.imageId)
    .first(
      'images.width',
      'images.height',
      'images.header',
      'images.unit',
      'images.name',
      'images.contentSha256',
      'images.beam',
      'image_blobs.mask',
    )) as StudyImageRow | undefined;
  if (!image) throw notFound('The image of this run no longer exists.');
  return image;
}

async function runNoiseSigma(knex: Knex, runId: number): Promise<number | null> {
  const row = (await knex('runs').where('id', runId).first('diagnostics')) as
    { diagnostics: { noise?: { sigma?: number | null } } | null } | undefined;
  return row?.diagnostics?.noise?.sigma ?? null;
}

export async function createStudy(
  ctx: AppContext,
  user: Express.User,
  run: Run,
  request: CreateInjectionStudyOutput,
): Promise<InjectionStudy> {
  requireSucceededRun(run);
  const image = await runImage(ctx.knex, run);
  const known = (await ctx.knex('run_sources').where('runId', run.id).select('x', 'y')) as {
    x: number;
    y: number;
  }[];
  const plan = planStudy(
    request,
    { width: image.width, height: image.height, header: image.header, mask: new Uint8Array(image.mask) },
    { settings: run.settings, noiseSigma: await runNoiseSigma(ctx.knex, run.id) },
    known,
  );
  const queue = await injectionQueueOf(ctx);
  const { study, trials } = await InjectionStudy.transaction(async (trx) => {
    const study = await InjectionStudy.query(trx).insertAndFetch({
      runId: run.id,
      projectId: run.projectId,
      createdBy: user.id,
      levelKind: request.levelKind,
      levels: request.levels,
      fluxes: plan.fluxes,
      sourcesPerLevel: request.sourcesPerLevel,
      seed: request.seed,
      radiusPixels: plan.radiusPixels,
      matchRadiusPixels: plan.matchRadiusPixels,
      status: 'queued',
      cancelRequested: false,
      trialsTotal: plan.runs.length + 1,
      trialsDone: 0,
    });
    const rows = [
      ...plan.runs.map((injection, index) => ({
        studyId: study.id,
        trialIndex: index,
        kind: 'injection' as const,
        level: injection.level,
        seed: injection.seed,
        injected: injection.truth,
        status: 'queued' as const,
        attempts: 0,
      })),
      {
        studyId: study.id,
        trialIndex: plan.runs.length,
        kind: 'false-source' as const,
        level: null,
        seed: null,
        injected: [],
        status: 'queued' as const,
        attempts: 0,
      },
    ];
    const trials = await InjectionTrial.query(trx).insertAndFetch(rows);
    return { study, trials };
  });
  try {
    for (const trial of trials) {
      const jobId = await queue.send(trial.id);
      await InjectionTrial.query().findById(trial.id).patch({ jobId });
    }
  } catch (error) {
    await study
      .$query()
      .patch({ status: 'failed', errorMessage: 'The study could not be queued.', finishedAt: new Date() });
    throw error;
  }
  return study;
}

export async function listStudies(runId: number): Promise<InjectionStudyBody[]> {
  const studies = await InjectionStudy.query().where('runId', runId).orderBy('id', 'desc');
  return studies.map(toStudyBody);
}

export async function findStudy(runId: number, studyId: number): Promise<InjectionStudy> {
  const study = await InjectionStudy.query().findById(studyId).where('runId', runId);
  if (!study) throw notFound(studyNotFoundMessage);
  return study;
}

export async function studyDetail(study: InjectionStudy): Promise<InjectionStudyDetail> {
  const trials = await InjectionTrial.query().where('studyId', study.id).orderBy('trialIndex');
  return {
    ...toStudyBody(study),
    trials: trials.map((trial) => ({
      id: trial.id,
      trialIndex: trial.trialIndex,
      kind: trial.kind,
      level: trial.level,
      status: trial.status,
      attempts: trial.attempts,
      injected: trial.injected,
      recoveredCount:
        trial.recovered?.kind === 'injection'
          ? trial.recovered.outcomes.filter((outcome) => outcome.recovered).length
          : null,
      detections: trial.recovered?.detections ?? null,
      errorMessage: trial.errorMessage,
    })),
  };
}

/** Queued trials are cancelled at once (their jobs withdrawn); running ones stop when their worker looks. */
export async function cancelStudy(ctx: AppContext, runId: number, studyId: number): Promise<InjectionStudy> {
  const jobIds = await InjectionStudy.transaction(async (trx) => {
    const study = await InjectionStudy.query(trx).findById(studyId).where('runId', runId).forUpdate();
    if (!study) throw notFound(studyNotFoundMessage);
    if (isTerminalInjectionStatus(study.status)) {
      throw conflict(
        `Injection study ${study.id} has already ${study.status === 'cancelled' ? 'been cancelled' : study.status}; there is nothing to cancel.`,
      );
    }
    const queued = await InjectionTrial.query(trx).where({ studyId, status: 'queued' }).select('id', 'jobId');
    await InjectionTrial.query(trx)
      .where({ studyId, status: 'queued' })
      .patch({ status: 'cancelled', finishedAt: new Date() });
    const running = await InjectionTrial.query(trx).where({ studyId, status: 'running' }).resultSize();
    const ended = await InjectionTrial.query(trx)
      .where('studyId', studyId)
      .whereNotIn('status', ['queued', 'running'])
      .resultSize();
    await study.$query(trx).patch({
      cancelRequested: true,
      trialsDone: ended,
      ...(running === 0 ? { status: 'cancelled', finishedAt: new Date() } : {}),
    });
    return queued.map((trial) => trial.jobId).filter((id): id is string => id !== null);
  });
  await (await injectionQueueOf(ctx)).cancel(jobIds).catch((error: unknown) => ctx.logger.error(error));
  return findStudy(runId, studyId);
}

export async function deleteStudy(runId: number, studyId: number): Promise<void> {
  await InjectionStudy.transaction(async (trx) => {
    const study = await InjectionStudy.query(trx).findById(studyId).where('runId', runId).forUpdate();
    if (!study) throw notFound(studyNotFoundMessage);
    if (!isTerminalInjectionStatus(study.status)) {
      throw conflict(
        `Injection study ${study.id} is ${study.status}; cancel it and wait until it has stopped before deleting it.`,
      );
    }
    await InjectionStudy.query(trx).deleteById(studyId);
  });
}

/** The provenance of the study's tables: the run's image, settings and finish time. */
function provenanceOf(ctx: AppContext, run: Run, image: StudyImageRow): CatalogueProvenance {
  return catalogueProvenance(image, run, ctx.version, isoDate(run.finishedAt ?? run.updatedAt));
}

/** The completeness table with the SNR of each level after the flux (null for Poisson images). */
function withSnrColumn(table: CatalogueTable, snrs: readonly (number | null)[]): CatalogueTable {
  const at = table.columns.findIndex((column) => column.name === 'flux') + 1;
  const snr = {
    name: 'snr',
    datatype: 'double' as const,
    unit: '',
    ucd: 'stat.snr',
    description: 'SNR of an isolated source at this flux (flux / (sigma / sqrt(sum psf^2)))',
  };
  return {
    ...table,
    columns: [...table.columns.slice(0, at), snr, ...table.columns.slice(at)],
    rows: table.rows.map((row, k) => [...row.slice(0, at), snrs[k] ?? null, ...row.slice(at)]),
  };
}

export async function studyExport(
  ctx: AppContext,
  run: Run,
  study: InjectionStudy,
  query: { table: 'completeness' | 'false-sources'; format: 'csv' | 'votable' | 'fits' },
): Promise<Download> {
  if (study.status !== 'succeeded' || !study.results) {
    throw conflict(
      `Injection study ${study.id} is ${study.status}; its results can be exported once it has succeeded.`,
    );
  }
  const image = await runImage(ctx.knex, run);
  const provenance = provenanceOf(ctx, run, image);
  const results = study.results;
  const table =
    query.table === 'completeness'
      ? withSnrColumn(
          completenessToTable(results.levels as LevelResult[], provenance, results.fluxUnit),
          results.levels.map((level) => level.snr),
        )
      : falseSourcesToTable(
          results.falseSources.bins,
          provenance,
          results.falseSources.areaUnit === 'deg2' ? 'deg-2' : 'pix-2',
        );
  return tableDownload(table, `skysieve-run-${run.id}-injection-${study.id}-${query.table}`, query.format);
}

/** Log-spaced edges over the flux range (positive fluxes), widened by a hair so the brightest falls inside. */
export function logBinEdges(fluxes: readonly number[], bins: number): number[] {
  const positive = fluxes.filter((flux) => flux > 0 && Number.isFinite(flux));
  if (positive.length === 0) return [];
  const low = Math.min(...positive);
  const high = Math.max(...positive) * (1 + 1e-9);
  if (!(high > low)) return [low * 0.9, low * 1.1];
  const step = Math.log(high / low) / bins;
  return Array.from({ length: bins + 1 }, (_, k) => low * Math.exp(step * k));
}

export interface CountsAnswer {
  counts: NumberCounts;
  table: () => CatalogueTable;
}

export async function runNumberCounts(
  ctx: AppContext,
  run: Run,
  query: NumberCountsQuery,
): Promise<CountsAnswer> {
  if (run.status !== 'succeeded') {
    throw conflict(`Run ${run.id} is ${run.status}; number counts are available once it has succeeded.`);
  }
  const image = await runImage(ctx.knex, run);
  const fluxes = (
    (await ctx.knex('run_sources').where('runId', run.id).select('flux')) as { flux: number }[]
  ).map((row) => row.flux);
  const bins = query.bins ?? 8;
  const edges = typeof bins === 'number' ? logBinEdges(fluxes, bins) : bins;
  // A run that found nothing has no flux range for automatic bins: its counts are an empty list (not an error).
  const nothing = edges.length < 2 && fluxes.length === 0;
  if (edges.length < 2 && !nothing) {
    throw new AppError('unprocessable', `Run ${run.id} has no sources with a positive flux to count.`);
  }
  let study: InjectionStudy | undefined;
  if (query.studyId !== undefined) {
    study = await findStudy(run.id, query.studyId);
    if (study.status !== 'succeeded') {
      throw conflict(
        `Injection study ${study.id} is ${study.status}; only a finished study can correct the counts.`,
      );
    }
  } else {
    study = await InjectionStudy.query()
      .where({ runId: run.id, status: 'succeeded' })
      .orderBy('id', 'desc')
      .first();
  }
  const area = surveyArea(image.width, image.height, new Uint8Array(image.mask), image.header);
  const levels = study?.results?.levels ? [...study.results.levels].sort((a, b) => a.flux - b.flux) : null;
  // numberCounts takes steradians; without a celestial WCS the pixel² area goes in instead, so its "per sr"
  // values are per pixel² (and its per-deg² values meaningless, left out).
  const celestial = area.unit === 'deg2';
  const counted = nothing
    ? []
    : numberCounts(fluxes, {
        binEdges: edges,
        areaSr: celestial ? area.area / DEG2_PER_SR : area.area,
        completeness: levels
          ? {
              flux: levels.map((level) => level.flux),
              completeness: levels.map((level) => level.completeness),
            }
          : undefined,
      });
  const perArea = (v: { value: number; low: number; high: number }, width: number) => ({
    value: v.value * width,
    low: v.low * width,
    high: v.high * width,
  });
  const fluxUnit = fluxUnits(image.unit ?? '').flux;
  const unitWords = area.unit === 'deg2' ? 'deg⁻²' : 'pixel⁻² (the image has no celestial WCS)';
  const counts: NumberCounts = {
    runId: run.id,
    areaUnit: area.unit,
    area: area.area,
    fluxUnit,
    sources: fluxes.length,
    studyId: study?.id ?? null,
    bins: counted.map((bin) => {
      const width = bin.fluxHigh - bin.fluxLow;
      return {
        fluxLow: bin.fluxLow,
        fluxHigh: bin.fluxHigh,
        fluxCentre: bin.fluxCentre,
        count: bin.count,
        countLow: bin.countLow,
        countHigh: bin.countHigh,
        perArea: perArea(celestial ? bin.perDeg2 : bin.perSr, width),
        dnds: celestial ? bin.perDeg2 : bin.perSr,
        completeness: bin.completeness,
        corrected: bin.corrected
          ? {
              count: bin.corrected.count,
              perArea: perArea(celestial ? bin.corrected.perDeg2 : bin.corrected.perSr, width),
              dnds: celestial ? bin.corrected.perDeg2 : bin.corrected.perSr,
            }
          : null,
        correctionNote: bin.correctionNote,
      };
    }),
    note:
      `Densities per ${unitWords} over ${area.validPixels} valid pixels; error bars are Gehrels (1986) 1σ-equivalent ` +
      'Poisson limits. Counts are binned by measured flux, completeness was measured against injected flux; the ' +
      'correction does not undo flux scattering between bins (Eddington bias) and leaves out bins below 50 % ' +
      'completeness or below the faintest injected level.' +
      (study
        ? ` Corrected with injection study ${study.id}.`
        : ' No finished injection study: raw counts only.'),
    caution: COMPLETENESS_CAUTION_TEXT,
  };
  return {
    counts,
    table: () => {
      const table = numberCountsToTable(counted, provenanceOf(ctx, run, image), fluxUnit);
      if (celestial) return table;
      // Without a celestial WCS the "per sr" columns hold per pixel² values: say so in the units and title.
      return {
        ...table,
        title: `${table.title} Densities per pixel^2 (no celestial WCS); the _sr columns are per pixel^2.`,
        columns: table.columns.map((column) =>
          column.name.startsWith('dnds_') ? { ...column, unit: '' } : column,
        ),
        rows: table.rows.map((row) =>
          row.map((cell, k) => (table.columns[k]!.name === 'dnds_deg2' ? null : cell)),
        ),
      };
    },
  };
}
