// @vitest-environment node
/**
 * Joint runs end to end through the API with a worker (pg-boss on the test database, the fit in the worker
 * thread): a simulated sharp/smooth pair of the Lyra Deep Field (samples/joint-pair.ts: 64² sharp, 32² smooth,
 * the smooth image's flux scale off by a known factor) → 202, queued → succeeded, the joint catalogue stored
 * with RA/Dec, the smooth image's scale factor within a few of its errors of the simulated one, every image's
 * components readable; the engine's checks refused at creation (422 with the engine's message) for an image
 * without a celestial WCS, footprints that do not overlap, an unsupported frame pair and irreconcilable units;
 * a refusal the headers cannot show fails the run with the engine's message and stores nothing; the store
 * rolls back whole; the authorization matrix of the new route and of the per-image components.
 * Outside references: the simulated truth (the scale error the pair was drawn with, source positions); astropy
 * (/usr/bin/python3) reading image 2's component FITS and its WCS.
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { simulateJointPair, type PairImage } from '../../samples/joint-pair';
import type { SimulatedSky } from '../../samples/sky-simulator';
import type { RunDetail, SourcePage } from '../../shared/runs';
import type { HeaderCard } from '../../server/engine/io/header-card';
import { Run } from '../../server/models/run';
import { User } from '../../server/models/user';
import { configureRunQueue, stopRunQueue } from '../../server/queue/run-queue';
import { type RunWorker, startRunWorker } from '../../server/queue/run-worker';
import type { FitThreadResult } from '../../server/runs/fit-thread';
import { storeRunResults } from '../../server/runs/run-results';
import { createToken } from '../../server/tokens/tokens.service';
import { type Actor, actors, editorsStatuses, readStatuses } from '../support/authorization-actors';
import {
  apiError,
  BrowserClient,
  createUser,
  signIn,
  startTestApp,
  type TestApp,
  TokenClient,
} from '../support/test-app';
import { type RunFixture, runFixture, storeImage, waitForRun } from './runs/run-support';

const SCALE_ERROR = 1.07;
const pair = simulateJointPair({
  size: 64,
  seed: 5,
  sharp: { fwhmPx: 3, sigma: 1 },
  smooth: { fwhmFinePx: 9, sigma: 0.5, scaleError: SCALE_ERROR },
  diffuse: { level: 5, logStd: 0.5, slope: 4 },
  sources: { count: 6, minFlux: 8, maxFlux: 40, minSeparationPx: 10, marginPx: 8 },
});

type Caller = Pick<BrowserClient, 'get' | 'post'>;
let t: TestApp;
let worker: RunWorker;
let f: RunFixture;
let owner: BrowserClient;
const callers = new Map<Actor, Caller>();
const ids = { sharp: 0, smooth: 0, noWcs: 0, elsewhere: 0, fk4: 0, kelvin: 0 };

/** The pair image as the test store takes it, with its header changed by `edit`. */
function asSky(image: PairImage, edit: (cards: HeaderCard[]) => HeaderCard[] = (c) => c): SimulatedSky {
  return {
    width: image.width,
    height: image.height,
    image: Float32Array.from(image.image),
    header: edit(image.header.map((card) => ({ ...card }))),
  } as unknown as SimulatedSky;
}

const setCard = (keyword: string, value: string | number) => (cards: HeaderCard[]) =>
  cards.map((card) => (card.keyword === keyword ? { ...card, value } : card));

beforeAll(async () => {
  t = await startTestApp();
  configureRunQueue(t.ctx, { pollingIntervalSeconds: 0.5 });
  worker = await startRunWorker(t.ctx, {
    concurrency: 1,
    pollingIntervalSeconds: 0.5,
    maintenanceIntervalSeconds: 5,
  });
  f = await runFixture(t.ctx);
  const store = (name: string, sky: SimulatedSky) => storeImage(t.ctx, f.project.id, f.owner, sky, name);
  ids.sharp = await store('lyra-sharp.fits', asSky(pair.sharp));
  ids.smooth = await store('lyra-smooth.fits', asSky(pair.smooth));
  ids.noWcs = await store(
    'lyra-no-wcs.fits',
    asSky(pair.smooth, (cards) => cards.filter((c) => !/^(CTYPE|CRVAL|CRPIX|CDELT|CUNIT)/.test(c.keyword))),
  );
  ids.elsewhere = await store('lyra-elsewhere.fits', asSky(pair.smooth, setCard('CRVAL2', 48.8)));
  ids.fk4 = await store(
    'lyra-fk4.fits',
    asSky(pair.smooth, (cards) => [
      ...setCard('RADESYS', 'FK4')(cards),
      { keyword: 'EQUINOX', value: 1950, real: true },
    ]),
  );
  ids.kelvin = await store('lyra-kelvin.fits', asSky(pair.smooth, setCard('BUNIT', 'K')));
  owner = await signIn(t.app, f.owner.email);
  const admin = await createUser(t.ctx, { role: 'admin' });
  const outsider = await createUser(t.ctx);
  callers.set('admin', await signIn(t.app, admin.email));
  callers.set('owner', owner);
  callers.set('editor', await signIn(t.app, f.editor.email));
  callers.set('viewer', await signIn(t.app, f.viewer.email));
  callers.set('non-member', await signIn(t.app, outsider.email));
  callers.set('signed-out', new BrowserClient(t.app));
  callers.set(
    'owner token',
    new TokenClient(t.app, (await createToken(f.owner, 'joint matrix', null)).token),
  );
}, 60_000);

afterAll(async () => {
  await worker?.stop();
  await stopRunQueue(t.ctx);
  await t.close();
});

const post = (body: object, caller: Caller = owner) =>
  caller.post(`/api/projects/${f.project.id}/joint-runs`, body);
const pairBody = (settings: object = {}) => ({
  images: [{ imageId: ids.sharp }, { imageId: ids.smooth }],
  settings: { maxIterations: 150, ...settings },
});
const isDone = (body: { status: string }) => ['succeeded', 'failed', 'cancelled'].includes(body.status);

describe('a joint run that succeeds', () => {
  let runId = 0;
  let detail: RunDetail;

  beforeAll(async () => {
    const response = await post(pairBody());
    expect(response.status, JSON.stringify(response.body)).toBe(202);
    expect(response.body).toEqual({ id: expect.any(Number), status: 'queued' });
    runId = response.body.id;
    detail = (await waitForRun((p) => owner.get(p), runId, isDone, 120_000)) as unknown as RunDetail;
  }, 130_000);

  it('succeeds through the queue, listed among the reference image runs as a joint run', async () => {
    expect(detail.status, detail.errorMessage ?? '').toBe('succeeded');
    expect(detail.kind).toBe('joint');
    expect(detail.imageId).toBe(ids.sharp);
    const list = await owner.get(`/api/images/${ids.sharp}/runs`);
    expect(list.body.runs.find((r: { id: number }) => r.id === runId)).toMatchObject({ kind: 'joint' });
  });

  it('reports its images with the fitted scale factors; the smooth image’s is the simulated one within 4 errors', () => {
    const joint = detail.joint!;
    expect(joint.images.map((i) => [i.position, i.imageId, i.name])).toEqual([
      [1, ids.sharp, 'lyra-sharp.fits'],
      [2, ids.smooth, 'lyra-smooth.fits'],
    ]);
    const [ref, smooth] = joint.images.map((i) => i.fit!);
    expect(ref!.scale).toMatchObject({ value: 1, fixed: true });
    expect(smooth!.scale.fixed).toBe(false);
    expect(smooth!.scale.error).toBeGreaterThan(0);
    expect(smooth!.scale.error).toBeLessThan(0.05);
    // The truth: the smooth image was drawn with its fluxes × 1.07 (samples/joint-pair.ts).
    expect(Math.abs(smooth!.scale.value - SCALE_ERROR)).toBeLessThan(4 * smooth!.scale.error + 0.005);
    expect(smooth!.unit).toBe('Jy/beam');
    expect(smooth!.inputSha256).toMatch(/^[0-9a-f]{64}$/);
    expect(joint.grid).toMatchObject({ width: 64, height: 64, factor: 1 });
  });

  it('stores the joint catalogue in the reference image’s pixels with RA/Dec, near the simulated sources', async () => {
    const page = (await owner.get(`/api/runs/${runId}/sources?pageSize=1000`)).body as SourcePage;
    expect(page.total).toBeGreaterThanOrEqual(4);
    expect(detail.sourceCount).toBe(page.total);
    let matched = 0;
    for (const truth of pair.truth.sources.filter((s) => s.flux >= 15)) {
      const near = page.sources.find((s) => Math.hypot(s.x - 1 - truth.x, s.y - 1 - truth.y) < 1.5);
      if (!near) continue;
      matched++;
      expect(near.ra).not.toBeNull();
      expect(Math.abs(near.ra! - truth.ra) * 3600 * Math.cos((truth.dec * Math.PI) / 180)).toBeLessThan(4);
    }
    expect(matched).toBeGreaterThanOrEqual(
      Math.min(2, pair.truth.sources.filter((s) => s.flux >= 15).length),
    );
  });

  it('serves every image’s components: image 2 on its own 32² grid, the common sky fields on the reference grid', async () => {
    const one = await owner.get(`/api/runs/${runId}/components/residual`);
    expect(one.status).toBe(200);
    expect([one.headers['x-plane-width'], one.headers['x-plane-height']]).toEqual(['64', '64']);
    const two = await owner.get(`/api/runs/${runId}/components/residualNorm?image=2`).buffer(true);
    expect(two.status).toBe(200);
    expect([two.headers['x-plane-width'], two.headers['x-plane-height']]).toEqual(['32', '32']);
    const values = new Float32Array(new Uint8Array(two.body as Buffer).slice().buffer);
    const finite = [...values].filter(Number.isFinite);
    const rms = Math.sqrt(finite.reduce((a, v) => a + v * v, 0) / finite.length);
    // A good joint fit leaves the smooth image's normalised residuals near unit variance.
    expect(rms).toBeGreaterThan(0.5);
    expect(rms).toBeLessThan(2);
    const model2 = await owner.get(`/api/runs/${runId}/components/model?image=2&format=fits`);
    expect(model2.status).toBe(200);
    expect(model2.headers['content-disposition']).toContain(`skysieve-run-${runId}-image2-model.fits`);
    expect((await owner.get(`/api/runs/${runId}/components/diffuseSky?image=2`)).status).toBe(404);
    expect((await owner.get(`/api/runs/${runId}/components/model?image=3`)).status).toBe(404);
    const bytes = await t.ctx
      .knex('run_image_components')
      .where('runId', runId)
      .sum('byteSize as total')
      .first();
    const run = await Run.query().findById(runId);
    expect(Number(bytes!.total)).toBe(5 * 32 * 32 * 4);
    expect(run!.resultBytes).toBeGreaterThan(7 * 64 * 64 * 4 + Number(bytes!.total) - 1);
  });

  it('compares with a single-image run of its reference image (diffuse difference, cross-match)', async () => {
    const single = await owner.post(`/api/images/${ids.sharp}/runs`, { settings: { maxIterations: 150 } });
    expect(single.status, JSON.stringify(single.body)).toBe(202);
    const done = await waitForRun((p) => owner.get(p), single.body.id, isDone, 60_000);
    expect(done.status, String(done.errorMessage)).toBe('succeeded');
    const created = await owner.post(`/api/projects/${f.project.id}/comparisons`, {
      name: 'joint against sharp alone',
      runIds: [runId, single.body.id],
    });
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    const comparisonId = created.body.id as number;
    const difference = await owner.get(
      `/api/comparisons/${comparisonId}/difference?a=${runId}&b=${single.body.id}&maxSize=64`,
    );
    expect(difference.status).toBe(200);
    expect(difference.headers['x-plane-width']).toBe('64');
    const match = await owner.get(
      `/api/comparisons/${comparisonId}/cross-match?a=${runId}&b=${single.body.id}`,
    );
    expect(match.status, JSON.stringify(match.body)).toBe(200);
    // The same sky measured twice: most bright sources of the joint catalogue are found alone too.
    expect(match.body.pairs.length).toBeGreaterThanOrEqual(Math.min(3, detail.sourceCount ?? 0));
    // A joint run is a run of its reference only: with a run of image 2 it is refused as for any two images.
    const other = await owner.post(`/api/images/${ids.smooth}/runs`, { settings: { maxIterations: 20 } });
    const otherDone = await waitForRun((p) => owner.get(p), other.body.id, isDone, 60_000);
    expect(otherDone.status).toBe('succeeded');
    const refused = await owner.post(`/api/projects/${f.project.id}/comparisons`, {
      name: 'joint against smooth',
      runIds: [runId, other.body.id],
    });
    expect(refused.status).toBe(422);
    expect(refused.body.error.message).toMatch(/^Only runs of the same image can be compared/);
  }, 130_000);

  it('refuses an injection study: its trials would re-run a single-image fit (422, nothing stored)', async () => {
    const refused = await owner.post(`/api/runs/${runId}/injection-studies`, {
      levelKind: 'snr',
      levels: [10],
      sourcesPerLevel: 4,
      seed: 1,
    });
    expect(refused.status, JSON.stringify(refused.body)).toBe(422);
    expect(refused.body.error.message).toMatch(/is a joint run of several images; injection studies measure/);
    const rows = await t.ctx.knex('injection_studies').where('runId', runId).count({ n: '*' });
    expect(Number(rows[0]!.n)).toBe(0);
  });

  it('writes image 2’s planes as FITS with image 2’s own WCS (read back by astropy)', async () => {
    const fits = await owner
      .get(`/api/runs/${runId}/components/model?image=2&format=fits`)
      .buffer(true)
      .parse((res, done) => {
        const chunks: Buffer[] = [];
        res.on('data', (chunk: Buffer) => chunks.push(chunk));
        res.on('end', () => done(null, Buffer.concat(chunks)));
      });
    const folder = mkdtempSync(join(tmpdir(), 'joint-fits-'));
    try {
      const path = join(folder, 'model2.fits');
      writeFileSync(path, fits.body as Buffer);
      const truth = pair.truth.sources[0]!;
      // The coarse pixel of a fine (0-based) position: ((x + ½)/2 − ½), FITS 1-based + 1 (samples/joint-pair.ts).
      const cx = (truth.x + 0.5) / 2 - 0.5 + 1;
      const cy = (truth.y + 0.5) / 2 - 0.5 + 1;
      const script = [
        'import json, sys',
        'from astropy.io import fits',
        'from astropy.wcs import WCS',
        'h = fits.open(sys.argv[1])[0]',
        'w = WCS(h.header)',
        'ra, dec = w.all_pix2world([[float(sys.argv[2]), float(sys.argv[3])]], 1)[0]',
        'print(json.dumps({"shape": list(h.data.shape), "ra": float(ra), "dec": float(dec), "bunit": h.header.get("BUNIT")}))',
      ].join('\n');
      const out = JSON.parse(
        execFileSync('/usr/bin/python3', ['-c', script, path, String(cx), String(cy)]).toString(),
      ) as { shape: number[]; ra: number; dec: number; bunit: string };
      expect(out.shape).toEqual([32, 32]);
      expect(out.bunit).toBe('Jy/beam');
      // The same sky position through image 2's header (astropy) as through the sharp image's (the simulator).
      expect(Math.abs(out.ra - truth.ra) * 3600 * Math.cos((truth.dec * Math.PI) / 180)).toBeLessThan(0.01);
      expect(Math.abs(out.dec - truth.dec) * 3600).toBeLessThan(0.01);
    } finally {
      rmSync(folder, { recursive: true, force: true });
    }
  });

  it('lets the authorization rules decide who reads its images and components', async () => {
    for (const actor of actors) {
      const caller = callers.get(actor)!;
      const response = await caller.get(`/api/runs/${runId}/components/residual?image=2&maxSize=16`);
      expect(response.status, `${actor}`).toBe(readStatuses[actor]);
      const show = await caller.get(`/api/runs/${runId}`);
      expect(show.status, `${actor}`).toBe(readStatuses[actor]);
    }
  });
});

describe('a joint run with the coarse image as the reference', () => {
  it('keeps the catalogue in the reference’s pixels and the sky fields on the 2× finer common grid, FITS included', async () => {
    const response = await post({
      images: [{ imageId: ids.smooth }, { imageId: ids.sharp }],
      settings: { maxIterations: 150 },
    });
    expect(response.status, JSON.stringify(response.body)).toBe(202);
    const runId = response.body.id as number;
    const detail = (await waitForRun((p) => owner.get(p), runId, isDone, 120_000)) as unknown as RunDetail;
    expect(detail.status, detail.errorMessage ?? '').toBe('succeeded');
    expect(detail.imageId).toBe(ids.smooth);
    expect(detail.joint!.grid).toMatchObject({ width: 64, height: 64, factor: 2 });
    expect(detail.joint!.refinement).toBe('sharpest-image');
    // Relative to the coarse reference the sharp image's scale is 1/1.07.
    const sharpScale = detail.joint!.images[1]!.fit!.scale;
    expect(Math.abs(sharpScale.value - 1 / SCALE_ERROR)).toBeLessThan(4 * sharpScale.error + 0.005);
    const sizes = Object.fromEntries(detail.components.map((c) => [c.name, [c.width, c.height]]));
    expect(sizes).toMatchObject({
      residual: [32, 32],
      diffuse: [32, 32],
      diffuseSky: [64, 64],
      compactSky: [64, 64],
    });
    const page = (await owner.get(`/api/runs/${runId}/sources?pageSize=1000`)).body as SourcePage;
    expect(page.total).toBeGreaterThan(0);
    for (const source of page.sources) {
      expect(source.x).toBeGreaterThan(0);
      expect(source.x).toBeLessThan(33);
    }
    const fits = await owner
      .get(`/api/runs/${runId}/components/diffuseSky?format=fits`)
      .buffer(true)
      .parse((res, done) => {
        const chunks: Buffer[] = [];
        res.on('data', (chunk: Buffer) => chunks.push(chunk));
        res.on('end', () => done(null, Buffer.concat(chunks)));
      });
    const folder = mkdtempSync(join(tmpdir(), 'joint-grid-'));
    try {
      const path = join(folder, 'sky.fits');
      writeFileSync(path, fits.body as Buffer);
      const truth = pair.truth.sources[0]!;
      const script = [
        'import json, sys',
        'from astropy.io import fits',
        'from astropy.wcs import WCS',
        'h = fits.open(sys.argv[1])[0]',
        'ra, dec = WCS(h.header).all_pix2world([[float(sys.argv[2]), float(sys.argv[3])]], 1)[0]',
        'print(json.dumps({"shape": list(h.data.shape), "ra": float(ra), "dec": float(dec)}))',
      ].join('\n');
      // The common grid is the sharp image's grid here: a fine pixel is where the simulator put the source.
      const out = JSON.parse(
        execFileSync('/usr/bin/python3', [
          '-c',
          script,
          path,
          String(truth.x + 1),
          String(truth.y + 1),
        ]).toString(),
      ) as { shape: number[]; ra: number; dec: number };
      expect(out.shape).toEqual([64, 64]);
      expect(Math.abs(out.ra - truth.ra) * 3600 * Math.cos((truth.dec * Math.PI) / 180)).toBeLessThan(0.01);
      expect(Math.abs(out.dec - truth.dec) * 3600).toBeLessThan(0.01);
    } finally {
      rmSync(folder, { recursive: true, force: true });
    }
    // Deleting it removes every image's planes and gives all their bytes back.
    const run = (await Run.query().findById(runId))!;
    const used = (await User.query().findById(f.owner.id))!.bytesUsed;
    expect((await owner.delete(`/api/runs/${runId}`)).status).toBe(204);
    expect((await User.query().findById(f.owner.id))!.bytesUsed).toBe(used - run.resultBytes);
    for (const table of ['run_images', 'run_image_components', 'run_components', 'run_sources']) {
      expect((await t.ctx.knex(table).where('runId', runId).count('* as n').first())!.n, table).toBe(0);
    }
  }, 130_000);
});

describe('checks before fitting', () => {
  const refused = async (otherId: number, message: RegExp) => {
    const before = await t.ctx.knex('runs').count('* as n').first();
    const response = await post({ images: [{ imageId: ids.sharp }, { imageId: otherId }] });
    expect(response.status, JSON.stringify(response.body)).toBe(422);
    expect(response.body.error.code).toBe('unprocessable');
    expect(response.body.error.message).toMatch(message);
    const after = await t.ctx.knex('runs').count('* as n').first();
    expect(after!.n).toBe(before!.n);
    return response.body.error.message as string;
  };

  it('refuses an image without a celestial WCS, naming it', async () => {
    const message = await refused(ids.noWcs, /^image 2 \(lyra-no-wcs\.fits\) has no celestial WCS/);
    expect(message).toContain('a joint fit needs every image placed on the sky');
  });

  it('refuses footprints that do not overlap', async () => {
    await refused(
      ids.elsewhere,
      /image 2 \(lyra-elsewhere\.fits\) does not overlap the footprint of the reference image/,
    );
  });

  it('refuses celestial frames without a supported conversion', async () => {
    await refused(ids.fk4, /no conversion between these frames is supported/);
  });

  it('refuses units that cannot be reconciled', async () => {
    await refused(
      ids.kelvin,
      /Cannot reconcile the units "Jy\/beam" \(image 1 \(lyra-sharp\.fits\)\) and "K"/,
    );
  });

  it('refuses one image, repeated images, images of another project and bad options with a 400/404', async () => {
    expect((await post({ images: [{ imageId: ids.sharp }] })).status).toBe(400);
    expect((await post({ images: [{ imageId: ids.sharp }, { imageId: ids.sharp }] })).status).toBe(400);
    const other = await runFixture(t.ctx);
    const response = await post({ images: [{ imageId: ids.sharp }, { imageId: other.imageId }] });
    expect(response.status).toBe(404);
    expect(response.body).toEqual(apiError('not_found', `Image ${other.imageId} is not in this project.`));
    const bad = await post({
      images: [{ imageId: ids.sharp }, { imageId: ids.smooth, options: { noiseSigma: -1 } }],
    });
    expect(bad.status).toBe(400);
  });
});

describe('storage quota', () => {
  it('refuses a joint run whose planes would not fit the reference uploader’s quota (413, nothing stored)', async () => {
    const user = (await User.query().findById(f.owner.id))!;
    // The planes alone: 5 × 64² + 5 × 32² float32 and two 64² sky fields = 122 880 bytes.
    await User.query()
      .patch({ quotaBytes: user.bytesUsed + 100_000 })
      .where('id', user.id);
    try {
      const before = await t.ctx.knex('runs').count('* as n').first();
      const response = await post(pairBody());
      expect(response.status, JSON.stringify(response.body)).toBe(413);
      expect(response.body.error.message).toContain("storage quota of the reference image's uploader");
      expect(response.body.error.details.neededBytes).toBe(
        5 * 64 * 64 * 4 + 5 * 32 * 32 * 4 + 2 * 64 * 64 * 4,
      );
      expect((await t.ctx.knex('runs').count('* as n').first())!.n).toBe(before!.n);
    } finally {
      await User.query().patch({ quotaBytes: user.quotaBytes }).where('id', user.id);
    }
  });
});

describe('failure leaves nothing half-written', () => {
  it('fails the run with the engine’s message when only the pixels show the problem, storing nothing', async () => {
    const bytesBefore = (await User.query().findById(f.owner.id))!.bytesUsed;
    const response = await post({
      images: [{ imageId: ids.sharp }, { imageId: ids.smooth, options: { likelihood: 'poisson' } }],
      settings: { maxIterations: 20 },
    });
    expect(response.status, JSON.stringify(response.body)).toBe(202);
    const runId = response.body.id as number;
    const detail = await waitForRun((p) => owner.get(p), runId, isDone, 60_000);
    expect(detail.status).toBe('failed');
    expect(detail.errorMessage).toMatch(
      /^image 2 \(lyra-smooth\.fits\): the Poisson likelihood needs counts/,
    );
    for (const table of ['run_sources', 'run_components', 'run_image_components']) {
      expect((await t.ctx.knex(table).where('runId', runId).count('* as n').first())!.n, table).toBe(0);
    }
    expect((await User.query().findById(f.owner.id))!.bytesUsed).toBe(bytesBefore);
  }, 70_000);

  it('rolls the whole store back when one per-image plane cannot be written', async () => {
    const run = await Run.query().insertAndFetch({
      imageId: ids.sharp,
      projectId: f.project.id,
      kind: 'joint',
      createdBy: f.owner.id,
      status: 'running',
      requestedSettings: {},
      settings: {},
      settingsDigest: 'x',
      attempts: 1,
      cancelRequested: false,
      resultBytes: 0,
    });
    const plane = () => new Float32Array(4);
    const planes = {
      diffuse: plane(),
      compact: plane(),
      model: plane(),
      residual: plane(),
      residualNorm: plane(),
    };
    const result = {
      width: 2,
      height: 2,
      settings: {},
      settingsDigest: 'x',
      catalogue: [],
      planes: { ...planes, diffuseSky: plane(), compactSky: plane() },
      diagnostics: { convergence: [] },
      timings: {},
      // Position 2 twice: the second insert breaks the unique key.
      joint: {
        imagePlanes: [2, 2].map((position) => ({ position, width: 2, height: 2, planes })),
        results: { images: [] },
      },
    } as unknown as FitThreadResult;
    const bytesBefore = (await User.query().findById(f.owner.id))!.bytesUsed;
    await expect(storeRunResults(t.ctx.knex, run.id, result, {} as never, f.owner.id)).rejects.toThrow();
    expect((await t.ctx.knex('run_components').where('runId', run.id).count('* as n').first())!.n).toBe(0);
    expect((await t.ctx.knex('run_image_components').where('runId', run.id).count('* as n').first())!.n).toBe(
      0,
    );
    expect((await Run.query().findById(run.id))!.status).toBe('running');
    expect((await User.query().findById(f.owner.id))!.bytesUsed).toBe(bytesBefore);
  });
});

describe('authorization of POST /api/projects/:id/joint-runs', () => {
  it('lets editors, owners and admins start one; viewers 403, non-members 404, signed out 401', async () => {
    const statuses = editorsStatuses(202);
    for (const actor of actors) {
      const before = await t.ctx.knex('runs').count('* as n').first();
      const response = await post(pairBody({ maxIterations: 10 }), callers.get(actor)!);
      expect(response.status, `${actor}: ${JSON.stringify(response.body)}`).toBe(statuses[actor]);
      const after = await t.ctx.knex('runs').count('* as n').first();
      expect(Number(after!.n) - Number(before!.n), actor).toBe(statuses[actor] === 202 ? 1 : 0);
      if (response.status === 202) {
        // Keep the queue short: these runs are not needed.
        await callers.get(actor)!.post(`/api/runs/${response.body.id}/cancel`);
      }
    }
  });
});
