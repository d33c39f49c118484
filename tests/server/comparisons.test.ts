// @vitest-environment node
/**
 * Comparisons of runs end to end: two real runs of a 64 × 64 simulated image with different settings (and one of
 * a second image) fitted by a worker started here; save, list, read, rename, delete; the settings difference;
 * every refusal (count, repeats, other image, unfinished, other project); the diffuse difference view against
 * the two diffuse views; the catalogue cross-match against the runs' own catalogues; who may do what.
 * Outside references: the haversine distance (Sinnott 1984, Sky & Telescope 68(2) 159) recomputed here for the
 * "nothing left unmatched within the radius" check, and the default radius rule (half the geometric-mean beam).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import type { ComparisonDetail, RunCrossMatch } from '../../shared/comparisons';
import type { CatalogueSource } from '../../shared/catalogue';
import type { BeamSummary } from '../../shared/images';
import { Comparison } from '../../server/models/comparison';
import { Run } from '../../server/models/run';
import { configureRunQueue, stopRunQueue } from '../../server/queue/run-queue';
import { type RunWorker, startRunWorker } from '../../server/queue/run-worker';
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
import {
  fastSettings,
  type RunFixture,
  runFixture,
  smallSky,
  storeImage,
  waitForRun,
} from './runs/run-support';

type Caller = Pick<BrowserClient, 'get' | 'post' | 'patch' | 'delete'>;

let t: TestApp;
let worker: RunWorker;
let f: RunFixture;
let other: RunFixture;
let owner: BrowserClient;
let editor: BrowserClient;
let viewer: BrowserClient;
let outsider: BrowserClient;
const callers = new Map<Actor, Caller>();

/** Two runs of image A with different settings, one run of image B, a queued run of A, a run of another project. */
let runA1 = 0;
let runA2 = 0;
let runB = 0;
let queuedRun = 0;
let foreignRun = 0;
let imageB = 0;
const settingsA2 = { ...fastSettings, threshold: 8, compactAlpha: 2.5 };

beforeAll(async () => {
  t = await startTestApp();
  configureRunQueue(t.ctx, { pollingIntervalSeconds: 0.5 });
  worker = await startRunWorker(t.ctx, {
    concurrency: 1,
    pollingIntervalSeconds: 0.5,
    maintenanceIntervalSeconds: 5,
  });
  f = await runFixture(t.ctx);
  other = await runFixture(t.ctx, smallSky(5));
  imageB = await storeImage(t.ctx, f.project.id, f.owner, smallSky(23), 'lyra-second.fits');
  const admin = await createUser(t.ctx, { role: 'admin' });
  const stranger = await createUser(t.ctx);
  owner = await signIn(t.app, f.owner.email);
  editor = await signIn(t.app, f.editor.email);
  viewer = await signIn(t.app, f.viewer.email);
  outsider = await signIn(t.app, stranger.email);
  callers.set('admin', await signIn(t.app, admin.email));
  callers.set('owner', owner);
  callers.set('editor', editor);
  callers.set('viewer', viewer);
  callers.set('non-member', outsider);
  callers.set('signed-out', new BrowserClient(t.app));
  callers.set('owner token', new TokenClient(t.app, (await createToken(f.owner, 'comparisons', null)).token));

  const start = async (imageId: number, settings: object) => {
    const response = await owner.post(`/api/images/${imageId}/runs`, { settings });
    expect(response.status, JSON.stringify(response.body)).toBe(202);
    return response.body.id as number;
  };
  runA1 = await start(f.imageId, fastSettings);
  runA2 = await start(f.imageId, settingsA2);
  runB = await start(imageB, fastSettings);
  for (const id of [runA1, runA2, runB]) {
    const done = await waitForRun(
      (path) => owner.get(path),
      id,
      (body) => ['succeeded', 'failed', 'cancelled'].includes(body.status),
    );
    expect(done.status, JSON.stringify(done.errorMessage)).toBe('succeeded');
  }
  queuedRun = await insertRun(f.project.id, f.imageId, 'queued');
  foreignRun = await insertRun(other.project.id, other.imageId, 'succeeded');
}, 120_000);

afterAll(async () => {
  await worker?.stop();
  await stopRunQueue(t.ctx);
  await t.close();
});

/** A run row written straight into the table (no job: the worker never sees it). */
async function insertRun(projectId: number, imageId: number, status: 'queued' | 'succeeded') {
  const run = await Run.query().insertAndFetch({
    imageId,
    projectId,
    createdBy: null,
    status,
    requestedSettings: {},
    settings: {},
    settingsDigest: '0'.repeat(64),
    attempts: 0,
    cancelRequested: false,
    resultBytes: 0,
  });
  return run.id;
}

const create = (client: Caller, runIds: number[], name = 'Threshold 5 against 8', projectId = f.project.id) =>
  client.post(`/api/projects/${projectId}/comparisons`, { name, runIds });

async function saved(runIds = [runA1, runA2]): Promise<ComparisonDetail> {
  const response = await create(editor, runIds);
  expect(response.status, JSON.stringify(response.body)).toBe(201);
  return response.body as ComparisonDetail;
}

// eslint-disable-next-line @typescript-eslint/no-explicit-any
function binaryParser(res: any, callback: (error: Error | null, body: Buffer) => void) {
  const chunks: Buffer[] = [];
  res.on('data', (chunk: Buffer) => chunks.push(chunk));
  res.on('end', () => callback(null, Buffer.concat(chunks)));
}

function float32(bytes: Buffer): Float32Array {
  const out = new Float32Array(bytes.byteLength / 4);
  for (let i = 0; i < out.length; i++) out[i] = bytes.readFloatLE(i * 4);
  return out;
}

describe('saving and reading a comparison', () => {
  let comparison: ComparisonDetail;
  beforeAll(async () => {
    comparison = await saved();
  });

  it('answers 201 with the runs in the chosen order and the image', async () => {
    expect(comparison).toMatchObject({
      projectId: f.project.id,
      imageId: f.imageId,
      imageName: 'lyra-small.fits',
      name: 'Threshold 5 against 8',
      component: 'diffuse',
      runIds: [runA1, runA2],
      runCount: 2,
      createdBy: f.editor.id,
      createdByName: f.editor.displayName,
      note: null,
    });
    expect(comparison.runs.map((run) => [run.id, run.status])).toEqual([
      [runA1, 'succeeded'],
      [runA2, 'succeeded'],
    ]);
    // The order is the one chosen, not the id order.
    const reversed = await saved([runA2, runA1]);
    expect(reversed.runIds).toEqual([runA2, runA1]);
  });

  it('lists exactly the resolved settings that differ, with labels, in run order', async () => {
    const [first, second] = await Promise.all(
      [runA1, runA2].map(async (id) => (await owner.get(`/api/runs/${id}`)).body.settings as object),
    );
    // Which keys differ, from the runs' own stored settings after defaults.
    const differing = Object.keys({ ...first, ...second }).filter(
      (key) =>
        JSON.stringify((first as Record<string, unknown>)[key]) !==
        JSON.stringify((second as Record<string, unknown>)[key]),
    );
    expect(differing.sort()).toEqual(['compactAlpha', 'threshold']);
    expect(comparison.settingsDifference.map((row) => row.key).sort()).toEqual(differing.sort());
    const threshold = comparison.settingsDifference.find((row) => row.key === 'threshold')!;
    expect(threshold).toEqual({
      key: 'threshold',
      label: 'Detection threshold',
      unit: 'SNR',
      values: [5, 8],
      display: ['5', '8'],
    });
    const alpha = comparison.settingsDifference.find((row) => row.key === 'compactAlpha')!;
    expect(alpha.values).toEqual([1.5, 2.5]);
    expect(alpha.label).toMatch(/inverse-gamma α/);
  });

  it('is listed for viewers, newest first, and read by viewers through its link', async () => {
    const list = await viewer.get(`/api/projects/${f.project.id}/comparisons`);
    expect(list.status).toBe(200);
    const ids = (list.body.comparisons as { id: number }[]).map((c) => c.id);
    expect(ids).toContain(comparison.id);
    expect([...ids].sort((a, b) => b - a)).toEqual(ids);
    const one = await viewer.get(`/api/comparisons/${comparison.id}`);
    expect(one.status).toBe(200);
    expect(one.body).toEqual(comparison);
  });

  it('is renamed and re-pointed by editors; the name is checked', async () => {
    const renamed = await editor.patch(`/api/comparisons/${comparison.id}`, {
      name: '  Caution 1.5 against 2.5 ',
      component: 'residual',
    });
    expect(renamed.status, JSON.stringify(renamed.body)).toBe(200);
    expect(renamed.body).toMatchObject({ name: 'Caution 1.5 against 2.5', component: 'residual' });
    expect(Date.parse(renamed.body.updatedAt)).toBeGreaterThanOrEqual(Date.parse(comparison.updatedAt));
    const read = await viewer.get(`/api/comparisons/${comparison.id}`);
    expect(read.body).toMatchObject({ name: 'Caution 1.5 against 2.5', component: 'residual' });

    const empty = await editor.patch(`/api/comparisons/${comparison.id}`, { name: '   ' });
    expect(empty.status).toBe(400);
    expect(empty.body).toEqual(apiError('validation_failed', 'name: Give the comparison a name.'));
    const nothing = await editor.patch(`/api/comparisons/${comparison.id}`, {});
    expect(nothing.body).toEqual(apiError('validation_failed', 'Send a new name, a new component, or both.'));
    const wrongPlane = await editor.patch(`/api/comparisons/${comparison.id}`, { component: 'sky' });
    expect(wrongPlane.status).toBe(400);
  });

  it('keeps a comparison whose run was deleted, with a note', async () => {
    const spare = await insertRun(f.project.id, f.imageId, 'succeeded');
    const three = await saved([runA1, spare, runA2]);
    expect(three.runCount).toBe(3);
    await Run.query().deleteById(spare);
    const read = await viewer.get(`/api/comparisons/${three.id}`);
    expect(read.body).toMatchObject({
      runIds: [runA1, runA2],
      runCount: 3,
      note: 'One run of this comparison was deleted since it was saved.',
    });
  });

  it('is deleted by an editor, and then is gone', async () => {
    const doomed = await saved();
    expect((await editor.delete(`/api/comparisons/${doomed.id}`)).status).toBe(204);
    const gone = await viewer.get(`/api/comparisons/${doomed.id}`);
    expect(gone.status).toBe(404);
    expect(gone.body).toEqual(apiError('not_found', 'Comparison not found.'));
    // The runs themselves stay.
    expect((await owner.get(`/api/runs/${runA1}`)).status).toBe(200);
  });
});

describe('refusals', () => {
  const refused = async (runIds: number[], message: string) => {
    const before = await Comparison.query().resultSize();
    const response = await create(editor, runIds);
    expect(response.status, JSON.stringify(response.body)).toBe(422);
    expect(response.body).toEqual(apiError('unprocessable', message));
    expect(await Comparison.query().resultSize()).toBe(before);
  };

  it('one run or five runs', async () => {
    await refused([runA1], 'Choose between 2 and 4 runs to compare (1 chosen).');
    await refused(
      [runA1, runA2, runB, queuedRun, foreignRun],
      'Choose between 2 and 4 runs to compare (5 chosen).',
    );
  });
  it('the same run twice', async () => {
    await refused([runA1, runA1], `Run ${runA1} is listed twice; choose each run once.`);
  });
  it('runs of different images', async () => {
    await refused(
      [runA1, runB],
      `Only runs of the same image can be compared; these runs belong to 2 images (run ${runA1}: lyra-small.fits; run ${runB}: lyra-second.fits).`,
    );
  });
  it('a run that has not finished', async () => {
    await refused(
      [runA1, queuedRun],
      `Run ${queuedRun} is still queued; only runs that have succeeded can be compared.`,
    );
  });
  it("another project's run, and a run that does not exist, alike", async () => {
    await refused([runA1, foreignRun], `Run ${foreignRun} is not in this project.`);
    await refused([runA1, 999999], 'Run 999999 is not in this project.');
  });
  it('a body that is not a comparison', async () => {
    const response = await editor.post(`/api/projects/${f.project.id}/comparisons`, {
      runIds: [runA1, runA2],
    });
    expect(response.status).toBe(400);
    expect(response.body.error.code).toBe('validation_failed');
  });
});

describe('difference of the diffuse fields', () => {
  let comparison: ComparisonDetail;
  beforeAll(async () => {
    comparison = await saved();
  });

  for (const maxSize of [undefined, 32]) {
    it(`equals diffuse(a) − diffuse(b) pixel by pixel (${maxSize ? `maxSize ${maxSize}` : 'full size'})`, async () => {
      const size = maxSize ? `&maxSize=${maxSize}` : '';
      const view = async (path: string) => {
        const response = await viewer.get(path).buffer(true).parse(binaryParser);
        expect(response.status).toBe(200);
        return { headers: response.headers, data: float32(response.body as Buffer) };
      };
      const [a, b, difference] = await Promise.all([
        view(`/api/runs/${runA1}/components/diffuse?format=float32${size}`),
        view(`/api/runs/${runA2}/components/diffuse?format=float32${size}`),
        view(`/api/comparisons/${comparison.id}/difference?a=${runA1}&b=${runA2}${size}`),
      ]);
      for (const header of ['x-plane-width', 'x-plane-height', 'x-plane-factor', 'x-source-width']) {
        expect(difference.headers[header], header).toBe(a.headers[header]);
      }
      expect(difference.headers['x-plane-width']).toBe(maxSize ? '32' : '64');
      expect(difference.data.length).toBe(a.data.length);
      // Block means are linear, so the view of the difference is the difference of the views, up to float32
      // rounding (a few units in the last place of the values, ~1e-4 Jy/beam here).
      let largest = 0;
      let changed = 0;
      for (let i = 0; i < a.data.length; i++) {
        const expected = a.data[i]! - b.data[i]!;
        largest = Math.max(largest, Math.abs(difference.data[i]! - expected));
        if (expected !== 0) changed++;
      }
      expect(largest).toBeLessThan(1e-10);
      // The two runs' settings differ, so the diffuse fields do too (the check above is not 0 − 0).
      expect(changed).toBeGreaterThan(0);
    });
  }

  it('answers 304 to its own ETag, and b − a is the negative', async () => {
    const path = `/api/comparisons/${comparison.id}/difference?a=${runA1}&b=${runA2}&maxSize=32`;
    const first = await viewer.get(path).buffer(true).parse(binaryParser);
    const etag = first.headers.etag as string;
    expect(etag).toMatch(/^"difference-/);
    expect((await viewer.get(path).set('if-none-match', etag)).status).toBe(304);
    const reverse = await viewer
      .get(`/api/comparisons/${comparison.id}/difference?a=${runA2}&b=${runA1}&maxSize=32`)
      .buffer(true)
      .parse(binaryParser);
    expect(reverse.headers.etag).not.toBe(etag);
    const forward = float32(first.body as Buffer);
    const backward = float32(reverse.body as Buffer);
    for (let i = 0; i < forward.length; i++) expect(backward[i]).toBe(-forward[i]!);
  });

  it('refuses a run outside the comparison and the same run twice', async () => {
    const outside = await viewer.get(`/api/comparisons/${comparison.id}/difference?a=${runA1}&b=${runB}`);
    expect(outside.status).toBe(422);
    expect(outside.body).toEqual(
      apiError('unprocessable', `Run ${runB} is not part of this comparison (its runs: ${runA1}, ${runA2}).`),
    );
    const same = await viewer.get(`/api/comparisons/${comparison.id}/difference?a=${runA1}&b=${runA1}`);
    expect(same.status).toBe(400);
    expect(same.body).toEqual(apiError('validation_failed', 'Choose two different runs (a and b).'));
  });
});

describe('cross-match of the catalogues', () => {
  let comparison: ComparisonDetail;
  let match: RunCrossMatch;
  let sourcesA: CatalogueSource[];
  let sourcesB: CatalogueSource[];
  let beam: BeamSummary;
  beforeAll(async () => {
    comparison = await saved();
    const response = await viewer.get(`/api/comparisons/${comparison.id}/cross-match?a=${runA1}&b=${runA2}`);
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    match = response.body as RunCrossMatch;
    const catalogue = async (id: number) =>
      (await viewer.get(`/api/runs/${id}/sources?pageSize=1000&sort=id`)).body.sources as CatalogueSource[];
    [sourcesA, sourcesB] = await Promise.all([catalogue(runA1), catalogue(runA2)]);
    beam = (await viewer.get(`/api/images/${f.imageId}`)).body.beam as BeamSummary;
  });

  it('matches on the sky within half the geometric-mean beam', () => {
    expect(match.mode).toBe('sky');
    expect(match.unit).toBe('arcsec');
    expect(match.radiusSource).toBe('beam');
    // 3 px FWHM at 1.5″ per pixel (tests/server/runs/run-support.ts): BMAJ = BMIN = 4.5″.
    expect(match.radius).toBeCloseTo(0.5 * Math.sqrt(beam.majorArcsec * beam.minorArcsec), 12);
    expect(match.radius).toBeCloseTo(2.25, 6);
  });

  it('accounts for every source of both catalogues exactly once', () => {
    expect(sourcesA.length).toBeGreaterThan(0);
    expect(match.counts).toEqual({
      a: sourcesA.length,
      b: sourcesB.length,
      matched: match.pairs.length,
      onlyA: match.onlyA.length,
      onlyB: match.onlyB.length,
    });
    const idsA = [...match.pairs.map((p) => p.a.id), ...match.onlyA.map((s) => s.id)].sort((x, y) => x - y);
    const idsB = [...match.pairs.map((p) => p.b.id), ...match.onlyB.map((s) => s.id)].sort((x, y) => x - y);
    expect(idsA).toEqual(sourcesA.map((s) => s.id).sort((x, y) => x - y));
    expect(idsB).toEqual(sourcesB.map((s) => s.id).sort((x, y) => x - y));
    // A higher threshold keeps a subset: every source of the 8σ run has its partner among the 5σ run's.
    expect(match.pairs.length).toBeGreaterThan(0);
  });

  it("carries each side's own flux density and error, and a separation within the radius", () => {
    expect(match.fluxKind).toBe('fluxDensity');
    expect(match.fluxUnit).toBe('Jy');
    const byIdA = new Map(sourcesA.map((s) => [s.id, s]));
    const byIdB = new Map(sourcesB.map((s) => [s.id, s]));
    for (const pair of match.pairs) {
      const a = byIdA.get(pair.a.id)!;
      const b = byIdB.get(pair.b.id)!;
      expect([pair.a.flux, pair.a.fluxErr]).toEqual([a.fluxDensity, a.fluxDensityErr]);
      expect([pair.b.flux, pair.b.fluxErr]).toEqual([b.fluxDensity, b.fluxDensityErr]);
      expect(pair.separation).toBeLessThanOrEqual(match.radius);
      expect(pair.separation).toBeCloseTo(haversineArcsec(a, b), 9);
      expect(pair.fluxRatio).toBeCloseTo(a.fluxDensity! / b.fluxDensity!, 12);
    }
    // The same bright sources fitted twice: the fluxes agree to a few per cent.
    expect(match.fluxRatio.count).toBe(match.pairs.length);
    expect(Math.abs(match.fluxRatio.median! - 1)).toBeLessThan(0.1);
  });

  it('leaves no unmatched pair closer than the radius (one-to-one, greedy by distance)', () => {
    for (const a of match.onlyA) {
      for (const b of match.onlyB) {
        expect(haversineArcsec(a, b)).toBeGreaterThan(match.radius);
      }
    }
  });

  it('takes a given radius, and refuses a run outside the comparison', async () => {
    const tight = await viewer.get(
      `/api/comparisons/${comparison.id}/cross-match?a=${runA1}&b=${runA2}&radiusArcsec=0.000001`,
    );
    expect(tight.body).toMatchObject({ radius: 0.000001, radiusSource: 'given' });
    expect(tight.body.counts.matched).toBeLessThanOrEqual(match.counts.matched);
    const outside = await viewer.get(`/api/comparisons/${comparison.id}/cross-match?a=${runA1}&b=${runB}`);
    expect(outside.status).toBe(422);
  });
});

describe('cross-match of an image without a celestial WCS', () => {
  let match: RunCrossMatch;
  let pixelRuns: number[] = [];
  let sources: CatalogueSource[][] = [];
  beforeAll(async () => {
    // The same kind of field with its WCS and beam cards removed: positions are pixels only.
    const sky = smallSky(41);
    const celestial = /^(CTYPE|CRPIX|CRVAL|CDELT|CUNIT|RADESYS|BMAJ|BMIN|BPA)/;
    const plain = { ...sky, header: sky.header.filter((card) => !celestial.test(card.keyword)) };
    const imageId = await storeImage(t.ctx, f.project.id, f.owner, plain, 'lyra-pixels.fits');
    pixelRuns = [];
    for (const settings of [fastSettings, { ...fastSettings, compactAlpha: 2.5 }]) {
      const response = await owner.post(`/api/images/${imageId}/runs`, { settings });
      expect(response.status, JSON.stringify(response.body)).toBe(202);
      pixelRuns.push(response.body.id as number);
    }
    for (const id of pixelRuns) {
      const done = await waitForRun(
        (path) => owner.get(path),
        id,
        (body) => ['succeeded', 'failed', 'cancelled'].includes(body.status),
      );
      expect(done.status, JSON.stringify(done.errorMessage)).toBe('succeeded');
    }
    const comparison = await saved(pixelRuns);
    const response = await viewer.get(
      `/api/comparisons/${comparison.id}/cross-match?a=${pixelRuns[0]}&b=${pixelRuns[1]}`,
    );
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    match = response.body as RunCrossMatch;
    sources = await Promise.all(
      pixelRuns.map(
        async (id) =>
          (await viewer.get(`/api/runs/${id}/sources?pageSize=1000&sort=id`)).body
            .sources as CatalogueSource[],
      ),
    );
  }, 90_000);

  it('matches by pixel position within half the fitted PSF FWHM', async () => {
    expect(sources[0]!.every((s) => s.ra === null && s.dec === null)).toBe(true);
    expect(match).toMatchObject({ mode: 'pixel', unit: 'pixel', radiusSource: 'psf' });
    const diagnostics = (await owner.get(`/api/runs/${pixelRuns[0]}`)).body.diagnostics as {
      psfFwhmPx: { major: number; minor: number };
    };
    expect(match.radius).toBeCloseTo(
      0.5 * Math.sqrt(diagnostics.psfFwhmPx.major * diagnostics.psfFwhmPx.minor),
      12,
    );
    expect(match.counts.matched + match.counts.onlyA).toBe(sources[0]!.length);
    expect(match.counts.matched + match.counts.onlyB).toBe(sources[1]!.length);
    // Jy/beam with the PSF given: flux densities exist (flux / beam area in pixels) even without a WCS.
    const densities = [...sources[0]!, ...sources[1]!].every((s) => s.fluxDensity !== null);
    expect(match.fluxKind).toBe(densities ? 'fluxDensity' : 'flux');
    const byId = new Map(sources[0]!.map((s) => [s.id, s]));
    for (const pair of match.pairs) {
      const a = byId.get(pair.a.id)!;
      expect([pair.a.flux, pair.a.fluxErr]).toEqual(
        densities ? [a.fluxDensity, a.fluxDensityErr] : [a.flux, a.fluxErr],
      );
      expect(pair.separation).toBeCloseTo(Math.hypot(pair.a.x - pair.b.x, pair.a.y - pair.b.y), 12);
      expect(pair.separation).toBeLessThanOrEqual(match.radius);
    }
    expect(match.pairs.length).toBeGreaterThan(0);
  });
});

/** Haversine great-circle distance in arcsec (Sinnott 1984), written out again here. */
function haversineArcsec(
  a: { ra: number | null; dec: number | null },
  b: { ra: number | null; dec: number | null },
) {
  const rad = Math.PI / 180;
  const h =
    Math.sin(((b.dec! - a.dec!) * rad) / 2) ** 2 +
    Math.cos(a.dec! * rad) * Math.cos(b.dec! * rad) * Math.sin(((b.ra! - a.ra!) * rad) / 2) ** 2;
  return ((2 * Math.asin(Math.sqrt(h))) / rad) * 3600;
}

describe('authorization', () => {
  let comparisonId = 0;
  beforeAll(async () => {
    comparisonId = (await saved()).id;
  });

  it.each(actors)(
    '%s: reads (list, one, difference, cross-match) follow the project roles',
    async (actor) => {
      const client = callers.get(actor)!;
      const expected = readStatuses[actor];
      const paths = [
        `/api/projects/${f.project.id}/comparisons`,
        `/api/comparisons/${comparisonId}`,
        `/api/comparisons/${comparisonId}/difference?a=${runA1}&b=${runA2}&maxSize=16`,
        `/api/comparisons/${comparisonId}/cross-match?a=${runA1}&b=${runA2}`,
      ];
      for (const path of paths) expect((await client.get(path)).status, path).toBe(expected);
    },
  );

  it.each(actors)('%s: saving and renaming need an editor', async (actor) => {
    const client = callers.get(actor)!;
    const expected = editorsStatuses(201)[actor];
    const before = await Comparison.query().resultSize();
    const response = await create(client, [runA1, runA2], `By ${actor}`);
    expect(response.status).toBe(expected);
    expect(await Comparison.query().resultSize()).toBe(before + (expected === 201 ? 1 : 0));
    const rename = await client.patch(`/api/comparisons/${comparisonId}`, { name: `Renamed by ${actor}` });
    expect(rename.status).toBe(editorsStatuses(200)[actor]);
  });

  it('a non-member following a shared link gets 404, the same as for a comparison that does not exist', async () => {
    const shared = await outsider.get(`/api/comparisons/${comparisonId}`);
    const missing = await outsider.get('/api/comparisons/999999');
    expect(shared.status).toBe(404);
    expect(shared.body).toEqual(missing.body);
    expect(shared.body).toEqual(apiError('not_found', 'Comparison not found.'));
  });

  it('signed out: 401 everywhere', async () => {
    const anonymous = callers.get('signed-out')!;
    expect((await anonymous.get(`/api/comparisons/${comparisonId}`)).status).toBe(401);
    expect((await anonymous.delete(`/api/comparisons/${comparisonId}`)).status).toBe(401);
  });

  it('deleting: viewers may not, unless they saved it; a non-member gets 404', async () => {
    const response = await viewer.delete(`/api/comparisons/${comparisonId}`);
    expect(response.status).toBe(403);
    expect(response.body).toEqual(
      apiError(
        'forbidden',
        'Only project owners and editors, or the person who saved it, can delete a comparison.',
      ),
    );
    expect((await outsider.delete(`/api/comparisons/${comparisonId}`)).status).toBe(404);
    // A comparison saved by a member who is now a viewer (written directly: viewers cannot save one).
    const own = await Comparison.query().insertAndFetch({
      projectId: f.project.id,
      imageId: f.imageId,
      name: 'Saved while an editor',
      component: 'diffuse',
      runCount: 2,
      createdBy: f.viewer.id,
    });
    await t.ctx.knex('comparison_runs').insert([
      { comparisonId: own.id, runId: runA1, position: 0 },
      { comparisonId: own.id, runId: runA2, position: 1 },
    ]);
    expect((await viewer.delete(`/api/comparisons/${own.id}`)).status).toBe(204);
    expect((await t.ctx.knex('comparison_runs').where('comparisonId', own.id)).length).toBe(0);
    expect((await owner.delete(`/api/comparisons/${comparisonId}`)).status).toBe(204);
  });
});
