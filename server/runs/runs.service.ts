/**
 * Runs: start one on an image, read it, list an image's runs, cancel one, and read its results (catalogue pages
 * and downloads, component planes, cutouts).
 */
import type { Knex } from 'knex';

import type { CatalogueSource } from '../../shared/catalogue';
import {
  type ComponentName,
  type Cutout,
  type RunDetail,
  type RunSummary,
  type SourcePage,
  type SourcesQuery,
  COMPONENT_NAMES,
  isTerminalRunStatus,
} from '../../shared/runs';
import { resolveSettings, type SeparationSettingsInput } from '../../shared/separation-settings';
import { CATALOGUE_CAUTION, sourcesToTable } from '../catalogue/catalogue-table';
import { catalogueProvenance, type Download, tableDownload, type TableFormat } from '../catalogue/downloads';
import type { AppContext } from '../context';
import { settingsDigest } from '../engine/separate';
import { writeFits } from '../engine/io/write-fits';
import type { HeaderCard } from '../engine/io/header-card';
import { AppError, conflict, notFound } from '../http/app-error';
import { downsampleMean } from '../images/downsample';
import { isoDate, isoDateOrNull } from '../models/base-model';
import type { Image } from '../models/image';
import { Run } from '../models/run';
import { bytesToFloat32, float32ToBytes } from '../models/run-component';
import { RunSource } from '../models/run-source';
import { runQueueOf } from '../queue/run-queue';
import { commonGrid, commonGridHeader } from '../engine/joint/common-grid';
import { parseWcs } from '../engine/wcs/wcs';
import { jointImageHeader, jointRunInfo } from './joint-runs.service';
import { quotaExceededMessage } from '../storage/quota';

export function toRunSummary(run: Run): RunSummary {
  return {
    id: run.id,
    imageId: run.imageId,
    projectId: run.projectId,
    createdBy: run.createdBy,
    status: run.status,
    progress: run.progress,
    errorMessage: run.errorMessage,
    attempts: run.attempts,
    cancelRequested: run.cancelRequested,
    sourceCount: run.sourceCount,
    kind: run.kind ?? 'single',
    timings: {
      queuedAt: isoDate(run.createdAt),
      startedAt: isoDateOrNull(run.startedAt),
      finishedAt: isoDateOrNull(run.finishedAt),
      phasesMs: run.phasesMs,
    },
  };
}

/** Bytes a finished run of a width × height image will store: seven float32 planes (sources come on top). */
export const estimatedResultBytes = (width: number, height: number): number =>
  COMPONENT_NAMES.length * width * height * 4;

export async function createRun(
  ctx: AppContext,
  user: Express.User,
  image: Image,
  settingsInput: SeparationSettingsInput,
): Promise<Run> {
  const settings = resolveSettings(settingsInput);
  // Early refusal when the results cannot fit the uploader's quota (the charge itself happens, locked, on store).
  if (image.uploadedById !== null) {
    const owner = (await ctx
      .knex('users')
      .where('id', image.uploadedById)
      .first('quotaBytes', 'bytesUsed')) as { quotaBytes: number; bytesUsed: number } | undefined;
    const needed = estimatedResultBytes(image.width, image.height);
    if (owner && owner.bytesUsed + needed > owner.quotaBytes) {
      const details = { usedBytes: owner.bytesUsed, quotaBytes: owner.quotaBytes, neededBytes: needed };
      throw new AppError(
        'payload_too_large',
        `The results of this run would not fit the storage quota of the image's uploader. ${quotaExceededMessage(details)}`,
        details,
      );
    }
  }
  const run = await Run.query().insertAndFetch({
    imageId: image.id,
    projectId: image.projectId,
    createdBy: user.id,
    status: 'queued',
    requestedSettings: settingsInput as Record<string, unknown>,
    settings: settings as unknown as Record<string, unknown>,
    settingsDigest: settingsDigest(settings),
    attempts: 0,
    cancelRequested: false,
    resultBytes: 0,
  });
  try {
    const queue = await runQueueOf(ctx);
    const jobId = await queue.send(run.id);
    return await run.$query().patchAndFetch({ jobId });
  } catch (error) {
    await run
      .$query()
      .patch({ status: 'failed', errorMessage: 'The run could not be queued.', finishedAt: new Date() });
    throw error;
  }
}

export async function listRuns(imageId: number): Promise<RunSummary[]> {
  const runs = await Run.query()
    .select(
      'id',
      'imageId',
      'projectId',
      'createdBy',
      'status',
      'progress',
      'errorMessage',
      'attempts',
      'cancelRequested',
      'sourceCount',
      'kind',
      'phasesMs',
      'startedAt',
      'finishedAt',
      'createdAt',
      'updatedAt',
    )
    .where('imageId', imageId)
    .orderBy('id', 'desc');
  return runs.map(toRunSummary);
}

export async function runDetail(knex: Knex, run: Run): Promise<RunDetail> {
  const [components, diagnostics] = await Promise.all([
    knex('run_components').where('runId', run.id).orderBy('id').select('name', 'width', 'height') as Promise<
      RunDetail['components']
    >,
    knex('runs').where('id', run.id).first('diagnostics') as Promise<
      { diagnostics: RunDetail['diagnostics'] } | undefined
    >,
  ]);
  return {
    ...toRunSummary(run),
    requestedSettings: run.requestedSettings,
    settings: run.settings,
    settingsDigest: run.settingsDigest,
    provenance: run.provenance,
    diagnostics: diagnostics?.diagnostics ?? null,
    components,
    resultBytes: run.resultBytes,
    joint: run.kind === 'joint' ? await jointRunInfo(knex, run) : null,
  };
}

/** Queued → cancelled at once (and its job withdrawn); running → the worker is asked to stop. */
export async function cancelRun(ctx: AppContext, runId: number): Promise<Run> {
  const outcome = await Run.transaction(async (trx) => {
    const run = await Run.query(trx).findById(runId).forUpdate();
    if (!run) throw notFound('Run not found.');
    if (isTerminalRunStatus(run.status)) {
      throw conflict(
        `Run ${run.id} has already ${run.status === 'cancelled' ? 'been cancelled' : run.status}; there is nothing to cancel.`,
      );
    }
    if (run.status === 'queued') {
      await run.$query(trx).patch({ status: 'cancelled', cancelRequested: true, finishedAt: new Date() });
    } else {
      await run.$query(trx).patch({ cancelRequested: true });
    }
    return run;
  });
  if (outcome.status === 'cancelled' && outcome.jobId) {
    await (await runQueueOf(ctx)).cancel(outcome.jobId).catch((error: unknown) => ctx.logger.error(error));
  }
  return (await Run.query().findById(runId))!;
}

/** Deletes a finished run with its sources and planes; the trigger on `runs` gives the result bytes back. */
export async function deleteRun(runId: number): Promise<void> {
  await Run.transaction(async (trx) => {
    const run = await Run.query(trx).modify('withoutDiagnostics').findById(runId).forUpdate();
    if (!run) throw notFound('Run not found.');
    if (!isTerminalRunStatus(run.status)) {
      throw conflict(
        `Run ${run.id} is ${run.status}; cancel it and wait until it has stopped before deleting it.`,
      );
    }
    await Run.query(trx).deleteById(runId);
  });
}

// ---- results ----

function requireSucceeded(run: Run): void {
  if (run.status !== 'succeeded') {
    throw conflict(
      run.status === 'queued' || run.status === 'running'
        ? `Run ${run.id} is ${run.status}; its results are available once it has succeeded.`
        : `Run ${run.id} ${run.status === 'failed' ? 'failed' : 'was cancelled'} and has no results.`,
    );
  }
}

const sortColumns: Record<string, string> = {
  id: 'sourceId',
  snr: 'snr',
  flux: 'flux',
  fluxDensity: 'fluxDensity',
  x: 'x',
  y: 'y',
  ra: 'ra',
  dec: 'dec',
};

function filteredSources(run: Run, query: SourcesQuery) {
  const q = RunSource.query().where('runId', run.id);
  if (query.minSnr !== undefined) q.where('snr', '>=', query.minSnr);
  if (query.maxSnr !== undefined) q.where('snr', '<=', query.maxSnr);
  if (query.minFlux !== undefined) q.where('flux', '>=', query.minFlux);
  if (query.maxFlux !== undefined) q.where('flux', '<=', query.maxFlux);
  if (query.flags === 'none') q.whereRaw("flags = '{}'");
  else if (query.flags) {
    q.whereRaw('flags @> ?::text[]', [query.flags.split(',').map((flag) => flag.trim())]);
  }
  return q;
}

export async function sourcePage(run: Run, query: SourcesQuery): Promise<SourcePage> {
  requireSucceeded(run);
  const descending = query.sort.startsWith('-');
  const column = sortColumns[query.sort.replace(/^-/, '')] ?? 'snr';
  const [rows, total] = await Promise.all([
    filteredSources(run, query)
      .orderBy(column, descending ? 'desc' : 'asc', 'last')
      .orderBy('sourceId')
      .offset((query.page - 1) * query.pageSize)
      .limit(query.pageSize),
    filteredSources(run, query).resultSize(),
  ]);
  return {
    sources: rows.map((row) => row.toCatalogueSource()),
    page: query.page,
    pageSize: query.pageSize,
    total,
    caution: CATALOGUE_CAUTION,
  };
}

interface ImageMeta {
  name: string;
  contentSha256: string;
  unit: string | null;
  header: HeaderCard[];
  beam: { majorArcsec: number; minorArcsec: number; paDeg: number } | null;
  width: number;
  height: number;
}

async function imageMeta(knex: Knex, imageId: number): Promise<ImageMeta> {
  const image = (await knex('images')
    .where('id', imageId)
    .first('name', 'contentSha256', 'unit', 'header', 'beam', 'width', 'height')) as ImageMeta | undefined;
  if (!image) throw notFound('The image of this run no longer exists.');
  return image;
}

/** The filtered catalogue (every page) in a standard format, written by the catalogue exporters. */
export async function sourceDownload(
  ctx: AppContext,
  run: Run,
  query: SourcesQuery,
  format: TableFormat,
): Promise<Download> {
  requireSucceeded(run);
  const descending = query.sort.startsWith('-');
  const column = sortColumns[query.sort.replace(/^-/, '')] ?? 'snr';
  const rows = await filteredSources(run, query)
    .orderBy(column, descending ? 'desc' : 'asc', 'last')
    .orderBy('sourceId');
  const sources: CatalogueSource[] = rows.map((row) => row.toCatalogueSource());
  const image = await imageMeta(ctx.knex, run.imageId);
  const provenance = catalogueProvenance(image, run, ctx.version, isoDate(run.finishedAt ?? run.updatedAt));
  const table = sourcesToTable(sources, provenance);
  const base = `skysieve-run-${run.id}-sources`;
  return tableDownload(table, base, format);
}

/**
 * A stored component plane of a succeeded run (409 before it has succeeded, 404 without that plane). `position`
 * names the input image of a joint run (1 = the reference, whose planes are the run's own components).
 */
export async function loadPlane(knex: Knex, run: Run, name: ComponentName, position = 1) {
  requireSucceeded(run);
  if (position > 1 && run.kind !== 'joint') throw notFound(`Run ${run.id} has only one image.`);
  const row = (await (
    position > 1
      ? knex('run_image_components').where({ runId: run.id, position, name })
      : knex('run_components').where({ runId: run.id, name })
  ).first('width', 'height', 'data')) as { width: number; height: number; data: Buffer } | undefined;
  if (!row) {
    throw notFound(
      position > 1
        ? `Image ${position} of run ${run.id} has no ${name} component.`
        : `Run ${run.id} has no ${name} component.`,
    );
  }
  return { width: row.width, height: row.height, data: bytesToFloat32(row.data) };
}

/** The header cards a component is written with: its image's, or the common grid's for a joint run's sky fields. */
async function componentHeader(
  knex: Knex,
  run: Run,
  name: ComponentName,
  position: number,
): Promise<{
  image: ImageMeta | { name: string; header: HeaderCard[]; unit: string | null };
  header: HeaderCard[];
}> {
  if (position > 1) {
    const image = await jointImageHeader(knex, run.id, position);
    if (!image) throw notFound(`Image ${position} of run ${run.id} no longer exists.`);
    return { image, header: image.header };
  }
  const image = await imageMeta(knex, run.imageId);
  const factor = run.jointResults?.grid.factor ?? 1;
  if (run.kind === 'joint' && factor > 1 && (name === 'diffuseSky' || name === 'compactSky')) {
    const wcs = parseWcs(image.header);
    if (wcs) {
      const grid = commonGrid(wcs, image.width, image.height, 1, factor);
      return { image, header: commonGridHeader(grid, wcs, image.header) };
    }
  }
  return { image, header: image.header };
}

/** A component as FITS, with the input's WCS, beam and provenance cards. */
export async function componentFits(
  ctx: AppContext,
  run: Run,
  name: ComponentName,
  position = 1,
): Promise<Download> {
  const plane = await loadPlane(ctx.knex, run, name, position);
  const { image, header } = await componentHeader(ctx.knex, run, name, position);
  const bytes = writeFits(plane, {
    header,
    unit: name === 'residualNorm' ? '' : (image.unit ?? undefined),
    softwareVersion: run.provenance?.softwareVersion ?? ctx.version,
    settingsDigest: run.settingsDigest,
    cards: [{ keyword: 'HISTORY', comment: `Skysieve run ${run.id}: ${name} component of ${image.name}` }],
  });
  const suffix = position > 1 ? `-image${position}` : '';
  return {
    contentType: 'application/fits',
    fileName: `skysieve-run-${run.id}${suffix}-${name}.fits`,
    body: Buffer.from(bytes),
  };
}

export interface PlaneView {
  width: number;
  height: number;
  factor: number;
  sourceWidth: number;
  sourceHeight: number;
  /** Little-endian float32, row-major, row 0 = FITS y = 1; NaN where blank. */
  body: Buffer;
}

/** A component block-averaged so that its longer side is at most maxSize (full size without it). */
export async function componentView(
  knex: Knex,
  run: Run,
  name: ComponentName,
  maxSize?: number,
  position = 1,
): Promise<PlaneView> {
  return planeView(await loadPlane(knex, run, name, position), maxSize);
}

/** Any full-size plane block-averaged so that its longer side is at most maxSize (full size without it). */
export function planeView(
  plane: { width: number; height: number; data: Float32Array },
  maxSize?: number,
): PlaneView {
  const view = downsampleMean(
    plane.data,
    null,
    plane.width,
    plane.height,
    maxSize ?? Math.max(plane.width, plane.height),
  );
  const body = float32ToBytes(view.data);
  return {
    width: view.width,
    height: view.height,
    factor: view.factor,
    sourceWidth: plane.width,
    sourceHeight: plane.height,
    body,
  };
}

/** A size × size cut around (x, y) (FITS 1-based pixels) of the input image or a component. */
export async function cutout(
  knex: Knex,
  run: Run,
  query: { x: number; y: number; size: number; plane: 'image' | ComponentName },
): Promise<Cutout> {
  let plane: { width: number; height: number; data: Float32Array; mask?: Uint8Array };
  if (query.plane === 'image') {
    const row = (await knex('images')
      .join('image_blobs', 'image_blobs.image_id', 'images.id')
      .where('images.id', run.imageId)
      .first('images.width', 'images.height', 'image_blobs.pixels', 'image_blobs.mask')) as
      { width: number; height: number; pixels: Buffer; mask: Buffer } | undefined;
    if (!row) throw notFound('The image of this run no longer exists.');
    plane = {
      width: row.width,
      height: row.height,
      data: bytesToFloat32(row.pixels),
      mask: new Uint8Array(row.mask),
    };
  } else {
    plane = await loadPlane(knex, run, query.plane);
  }
  const { width, height } = plane;
  if (query.x < 0.5 || query.x > width + 0.5 || query.y < 0.5 || query.y > height + 0.5) {
    throw new AppError(
      'bad_request',
      `The cutout centre (${query.x}, ${query.y}) lies outside the ${width} × ${height} image (pixels 1…${width}, 1…${height}).`,
    );
  }
  const size = query.size;
  const x0 = Math.round(query.x) - Math.floor(size / 2);
  const y0 = Math.round(query.y) - Math.floor(size / 2);
  const values: (number | null)[] = [];
  for (let j = 0; j < size; j++) {
    for (let i = 0; i < size; i++) {
      const x = x0 + i - 1;
      const y = y0 + j - 1;
      if (x < 0 || y < 0 || x >= width || y >= height) {
        values.push(null);
        continue;
      }
      const index = y * width + x;
      const v = plane.data[index]!;
      values.push(Number.isFinite(v) && (!plane.mask || plane.mask[index] !== 0) ? v : null);
    }
  }
  return { plane: query.plane, x0, y0, width: size, height: size, values };
}
