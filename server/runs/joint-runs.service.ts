/**
 * Joint runs: one separation fitted to 2–4 images of one project together (server/engine/joint). Creating one
 * checks the images against the stored headers first (joint-checks.ts: 422 with the engine's message), then
 * stores the run (kind 'joint', image_id = the reference) and its input images in one transaction and queues
 * it like a single run; the worker (queue/run-job.ts) fits all images in the fit thread.
 */
import type { Knex } from 'knex';

import type { CreateJointRunOutput, JointRunImage, JointRunInfo } from '../../shared/joint-runs';
import { resolveSettings } from '../../shared/separation-settings';
import { COMPONENT_NAMES } from '../../shared/runs';
import type { AppContext } from '../context';
import type { HeaderCard } from '../engine/io/header-card';
import { settingsDigest } from '../engine/separate';
import { AppError, notFound } from '../http/app-error';
import { Run } from '../models/run';
import { runQueueOf } from '../queue/run-queue';
import { quotaExceededMessage } from '../storage/quota';
import { checkJointInputs } from './joint-checks';

interface StoredImage {
  id: number;
  projectId: number;
  name: string;
  width: number;
  height: number;
  unit: string | null;
  header: HeaderCard[];
  uploadedById: number | null;
}

/**
 * Bytes a finished joint run will store: five float32 planes per image plus the two sky fields on the common
 * grid (sources come on top).
 */
export function estimatedJointResultBytes(
  images: { width: number; height: number }[],
  grid: { gridWidth: number; gridHeight: number },
) {
  const perImage = (COMPONENT_NAMES.length - 2) * 4;
  return (
    images.reduce((sum, image) => sum + perImage * image.width * image.height, 0) +
    2 * 4 * grid.gridWidth * grid.gridHeight
  );
}

export async function createJointRun(
  ctx: AppContext,
  user: Express.User,
  projectId: number,
  request: CreateJointRunOutput,
): Promise<Run> {
  const ids = request.images.map((image) => image.imageId);
  const rows = (await ctx
    .knex('images')
    .whereIn('id', ids)
    .where('projectId', projectId)
    .select('id', 'projectId', 'name', 'width', 'height', 'unit', 'header', 'uploadedById')) as StoredImage[];
  const byId = new Map(rows.map((row) => [row.id, row]));
  const missing = ids.filter((id) => !byId.has(id));
  if (missing.length > 0) {
    throw notFound(
      `${missing.length === 1 ? 'Image' : 'Images'} ${missing.join(', ')} ${missing.length === 1 ? 'is' : 'are'} not in this project.`,
    );
  }
  const images = request.images.map((input) => ({ ...byId.get(input.imageId)!, options: input.options }));
  const settings = resolveSettings(request.settings);
  const grid = checkJointInputs(images, settings);

  const reference = images[0]!;
  if (reference.uploadedById !== null) {
    const owner = (await ctx
      .knex('users')
      .where('id', reference.uploadedById)
      .first('quotaBytes', 'bytesUsed')) as { quotaBytes: number; bytesUsed: number } | undefined;
    const needed = estimatedJointResultBytes(images, grid);
    if (owner && owner.bytesUsed + needed > owner.quotaBytes) {
      const details = { usedBytes: owner.bytesUsed, quotaBytes: owner.quotaBytes, neededBytes: needed };
      throw new AppError(
        'payload_too_large',
        `The results of this joint run would not fit the storage quota of the reference image's uploader. ${quotaExceededMessage(details)}`,
        details,
      );
    }
  }

  const run = await Run.transaction(async (trx) => {
    const inserted = await Run.query(trx).insertAndFetch({
      imageId: reference.id,
      projectId,
      kind: 'joint',
      createdBy: user.id,
      status: 'queued',
      requestedSettings: request.settings as Record<string, unknown>,
      settings: settings as unknown as Record<string, unknown>,
      settingsDigest: settingsDigest(settings),
      attempts: 0,
      cancelRequested: false,
      resultBytes: 0,
    });
    await trx('run_images').insert(
      images.map((image, i) => ({
        runId: inserted.id,
        imageId: image.id,
        position: i + 1,
        options: JSON.stringify(image.options),
      })),
    );
    return inserted;
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

/** The input images of a joint run (reference first) with the fit's per-image results once it succeeded. */
export async function jointRunInfo(knex: Knex, run: Run): Promise<JointRunInfo> {
  const rows = (await knex('run_images')
    .join('images', 'images.id', 'run_images.image_id')
    .where('run_images.run_id', run.id)
    .orderBy('run_images.position')
    .select(
      'run_images.position',
      'run_images.image_id',
      'run_images.options',
      'images.name',
      'images.width',
      'images.height',
    )) as {
    position: number;
    imageId: number;
    options: JointRunImage['options'];
    name: string;
    width: number;
    height: number;
  }[];
  const results = run.jointResults;
  const byPosition = new Map(rows.map((row) => [row.position, row]));
  const count = Math.max(rows.at(-1)?.position ?? 0, results?.images.length ?? 0);
  const images: JointRunImage[] = [];
  for (let position = 1; position <= count; position++) {
    const row = byPosition.get(position);
    const fit = results?.images[position - 1] ?? null;
    // An input image deleted after the run finished keeps its place, named from the run's provenance.
    images.push({
      position,
      imageId: row?.imageId ?? null,
      name: row?.name ?? fit?.inputName ?? `image ${position} (deleted)`,
      width: row?.width ?? 0,
      height: row?.height ?? 0,
      options: row?.options ?? {},
      fit,
    });
  }
  return {
    images,
    grid: results?.grid ?? null,
    scalePriorWidth: results?.scalePriorWidth ?? 0.05,
    refinement: results?.refinement ?? null,
    warnings: results?.warnings ?? [],
  };
}

/** The header of input image `position` of a joint run (for its components as FITS). */
export async function jointImageHeader(
  knex: Knex,
  runId: number,
  position: number,
): Promise<{ name: string; header: HeaderCard[]; unit: string | null } | undefined> {
  return (await knex('run_images')
    .join('images', 'images.id', 'run_images.image_id')
    .where({ 'run_images.run_id': runId, 'run_images.position': position })
    .first('images.name', 'images.header', 'images.unit')) as
    { name: string; header: HeaderCard[]; unit: string | null } | undefined;
}
