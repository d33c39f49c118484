/**
 * Shared set-up of the run tests: a project with an owner, an editor and a viewer, and a small simulated image
 * (samples/sky-simulator.ts, seeded: a log-normal diffuse field, a few point sources, Gaussian noise, a SIN WCS
 * and a restoring beam) stored the way the image service stores uploads (images + image_blobs), read back by the
 * engine's own FITS reader first.
 */
import { createHash } from 'node:crypto';

import { expect } from 'vitest';

import { simulateSky, type SimulatedSky } from '../../../samples/sky-simulator';
import type { AppContext } from '../../../server/context';
import { readImage } from '../../../server/engine/io/read-image';
import { writeFits } from '../../../server/engine/io/write-fits';
import { beamSummary, pixelStatistics, wcsSummary } from '../../../server/images/image-analysis';
import { Membership } from '../../../server/models/membership';
import { Project } from '../../../server/models/project';
import { Run } from '../../../server/models/run';
import type { User } from '../../../server/models/user';
import { createUser } from '../../support/test-app';

export interface RunFixture {
  project: Project;
  owner: User;
  editor: User;
  viewer: User;
  imageId: number;
  sky: SimulatedSky;
}

/** 64 × 64 pixels, PSF FWHM 3 px, σ = 1e-4 Jy/beam, 5 sources between 50σ-ish and 200σ-ish flux. */
export function smallSky(seed = 11, size = 64): SimulatedSky {
  return simulateSky({
    width: size,
    height: size,
    seed,
    psf: { fwhmMajorPx: 3, fwhmMinorPx: 3, paDeg: 0 },
    diffuse: { level: 2e-4, logStd: 0.4, slope: 3.5 },
    sources: {
      count: Math.round((5 * size * size) / 4096),
      minFlux: 1e-2,
      maxFlux: 3e-2,
      minSeparationPx: 10,
    },
    noise: { kind: 'gaussian', sigma: 1e-4 },
    wcs: { projection: 'SIN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
    unit: 'Jy/beam',
    writeBeam: true,
  });
}

/** Stores the simulated image in `projectId` as an upload of `uploader` would be (quota not charged). */
export async function storeImage(
  ctx: AppContext,
  projectId: number,
  uploader: User,
  sky: SimulatedSky,
  name = 'lyra-small.fits',
) {
  const original = Buffer.from(
    writeFits({ width: sky.width, height: sky.height, data: sky.image }, { header: sky.header }),
  );
  const image = readImage(new Uint8Array(original), { fileName: name });
  const [row] = (await ctx
    .knex('images')
    .insert({
      projectId,
      uploadedById: uploader.id,
      name,
      originalFileName: name,
      format: 'fits',
      gzipped: false,
      contentSha256: createHash('sha256').update(original).digest('hex'),
      fileBytes: original.byteLength,
      width: image.width,
      height: image.height,
      plane: null,
      originalAxes: JSON.stringify(image.originalAxes),
      unit: image.unit,
      header: JSON.stringify(image.header),
      wcs: JSON.stringify(wcsSummary(image.wcs, image.width, image.height)),
      beam: JSON.stringify(beamSummary(image)),
      statistics: JSON.stringify(pixelStatistics(image.data, image.mask)),
      noise: null,
      warnings: JSON.stringify(image.warnings),
    })
    .returning('id')) as { id: number }[];
  await ctx.knex('image_blobs').insert({
    imageId: row!.id,
    original,
    pixels: Buffer.from(image.data.buffer, image.data.byteOffset, image.data.byteLength),
    mask: Buffer.from(image.mask),
    thumbnail: Buffer.alloc(0),
  });
  return row!.id;
}

export async function runFixture(ctx: AppContext, sky: SimulatedSky = smallSky()): Promise<RunFixture> {
  const [owner, editor, viewer] = await Promise.all([createUser(ctx), createUser(ctx), createUser(ctx)]);
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field',
    description: '',
    ownerId: owner.id,
  });
  await Membership.query().insert([
    { projectId: project.id, userId: owner.id, role: 'owner' },
    { projectId: project.id, userId: editor.id, role: 'editor' },
    { projectId: project.id, userId: viewer.id, role: 'viewer' },
  ]);
  const imageId = await storeImage(ctx, project.id, owner, sky);
  return { project, owner, editor, viewer, imageId, sky };
}

/** Settings that keep a 64 × 64 fit to a second or two: the PSF and σ given, a small iteration budget. */
export const fastSettings = {
  psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 },
  noiseSigma: 1e-4,
  maxIterations: 120,
};

/** Polls GET /api/runs/:id until `done(body)` or the time runs out; returns the last body. */
export async function waitForRun(
  get: (path: string) => PromiseLike<{ status: number; body: unknown }>,
  runId: number,
  done: (body: { status: string; [key: string]: unknown }) => boolean,
  timeoutMs = 60_000,
): Promise<{ status: string; [key: string]: unknown }> {
  const started = Date.now();
  for (;;) {
    const response = await get(`/api/runs/${runId}`);
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    const body = response.body as { status: string };
    if (done(body)) return body;
    if (Date.now() - started > timeoutMs)
      throw new Error(`Run ${runId} still ${body.status} after ${timeoutMs} ms: ${JSON.stringify(body)}`);
    await new Promise((resolve) => setTimeout(resolve, 200));
  }
}

/**
 * A run of the fixture's image by its owner, written straight into the table (no worker): succeeded with
 * `sourceCount` sources unless `status` says otherwise; a finished run gets a finish time.
 */
export async function insertRunRow(
  f: RunFixture,
  fields: {
    status?: 'succeeded' | 'queued';
    requestedSettings?: Record<string, unknown>;
    settings?: Record<string, unknown>;
    settingsDigest: string;
    sourceCount?: number | null;
  },
): Promise<Run> {
  const {
    status = 'succeeded',
    requestedSettings = {},
    settings = {},
    settingsDigest,
    sourceCount = null,
  } = fields;
  return Run.query().insertAndFetch({
    imageId: f.imageId,
    projectId: f.project.id,
    createdBy: f.owner.id,
    status,
    requestedSettings,
    settings,
    settingsDigest,
    attempts: 1,
    cancelRequested: false,
    resultBytes: 0,
    sourceCount,
    finishedAt: status === 'succeeded' ? new Date() : null,
  });
}

/** A catalogue row (run_sources) at pixel (x, y) with RA/Dec, flux 0.01 ± 0.001 and SNR 10. */
export function sourceRow(runId: number, sourceId: number, position: { x: number; y: number }) {
  return {
    runId,
    sourceId,
    ...position,
    xErr: 0.1,
    yErr: 0.1,
    ra: 283.7,
    dec: 38.6,
    raErrArcsec: 0.2,
    decErrArcsec: 0.2,
    flux: 0.01,
    fluxErr: 0.001,
    fluxDensity: null,
    fluxDensityErr: null,
    snr: 10,
    significance: null,
    flags: [],
  };
}
