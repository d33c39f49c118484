// @vitest-environment node
/**
 * Runs end to end through the API with a worker started in the test (pg-boss on the test database, the fit in a
 * worker thread): queued → running → succeeded on a 64 × 64 simulated image, every result route, the catalogue
 * downloads, cancel (queued and running), Server-Sent Events, a failing run and the e-mails.
 * Outside references: the simulated truth (positions and fluxes recovered within their stated errors); RFC 4180
 * CSV read back by csv-parse; the FITS headers read by the engine's reader (checked against astropy elsewhere).
 */
import { createHash } from 'node:crypto';

import { parse as parseCsv } from 'csv-parse/sync';
import { XMLParser } from 'fast-xml-parser';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import type { CatalogueSource } from '../../../shared/catalogue';
import type { RunDetail, RunEvent, SourcePage } from '../../../shared/runs';
import { sourceColumns } from '../../../server/catalogue/catalogue-table';
import { parseHeader } from '../../../server/engine/io/header-card';
import { readImage } from '../../../server/engine/io/read-image';
import { writeFits } from '../../../server/engine/io/write-fits';
import { Run } from '../../../server/models/run';
import { User } from '../../../server/models/user';
import { markRunLost, processRunJob } from '../../../server/queue/run-job';
import { configureRunQueue, stopRunQueue } from '../../../server/queue/run-queue';
import { type RunWorker, startRunWorker } from '../../../server/queue/run-worker';
import { createToken } from '../../../server/tokens/tokens.service';
import {
  apiError,
  type BrowserClient,
  mailTo,
  signIn,
  startTestApp,
  type TestApp,
} from '../../support/test-app';
import { fastSettings, type RunFixture, runFixture, smallSky, storeImage, waitForRun } from './run-support';

let t: TestApp;
let worker: RunWorker;
let f: RunFixture;
let owner: BrowserClient;
let editor: BrowserClient;

beforeAll(async () => {
  t = await startTestApp();
  configureRunQueue(t.ctx, { pollingIntervalSeconds: 0.5 });
  worker = await startRunWorker(t.ctx, {
    concurrency: 1,
    pollingIntervalSeconds: 0.5,
    maintenanceIntervalSeconds: 5,
  });
  f = await runFixture(t.ctx);
  await User.query().patch({ emailOnRunFinish: true }).where('id', f.owner.id);
  owner = await signIn(t.app, f.owner.email);
  editor = await signIn(t.app, f.editor.email);
}, 60_000);

afterAll(async () => {
  await worker?.stop();
  await stopRunQueue(t.ctx);
  await t.close();
});

const get = (path: string) => owner.get(path);

describe('a run that succeeds', () => {
  let runId = 0;
  let detail: RunDetail;

  beforeAll(async () => {
    const bytesBefore = (await User.query().findById(f.owner.id))!.bytesUsed;
    const response = await owner.post(`/api/images/${f.imageId}/runs`, { settings: fastSettings });
    expect(response.status, JSON.stringify(response.body)).toBe(202);
    expect(response.body).toEqual({ id: expect.any(Number), status: 'queued' });
    runId = response.body.id;
    const seen = new Set<string>();
    detail = (await waitForRun(get, runId, (body) => {
      seen.add(body.status);
      return ['succeeded', 'failed', 'cancelled'].includes(body.status);
    })) as unknown as RunDetail;
    expect(detail.status, JSON.stringify(detail.errorMessage)).toBe('succeeded');
    const bytesAfter = (await User.query().findById(f.owner.id))!.bytesUsed;
    // Result bytes: seven float32 planes of 64 × 64 plus 128 bytes per source row (server/runs/run-results.ts).
    expect(detail.resultBytes).toBe(7 * 64 * 64 * 4 + 128 * detail.sourceCount!);
    expect(bytesAfter - bytesBefore).toBe(detail.resultBytes);
  }, 90_000);

  it('records status, timings, settings after defaults and provenance', async () => {
    expect(detail.attempts).toBe(1);
    expect(detail.errorMessage).toBeNull();
    expect(detail.progress!.fraction).toBe(1);
    const { queuedAt, startedAt, finishedAt, phasesMs } = detail.timings;
    if (!startedAt || !finishedAt || !phasesMs)
      throw new Error(`timings missing: ${JSON.stringify(detail.timings)}`);
    expect(Date.parse(queuedAt)).toBeLessThanOrEqual(Date.parse(startedAt));
    expect(Date.parse(startedAt)).toBeLessThanOrEqual(Date.parse(finishedAt));
    expect(phasesMs.total).toBeGreaterThan(0);
    // The preset's values filled in (shared/separation-settings.ts), the given ones kept.
    expect(detail.settings).toMatchObject({
      preset: 'balanced',
      threshold: 5,
      noiseSigma: 1e-4,
      maxIterations: 120,
    });
    expect(detail.requestedSettings).toEqual({ ...fastSettings, preset: 'balanced' });
    const original = (await t.ctx.knex('image_blobs').where('imageId', f.imageId).first('original')) as {
      original: Buffer;
    };
    expect(detail.provenance).toEqual({
      softwareName: 'Skysieve',
      softwareVersion: t.ctx.version,
      settingsDigest: detail.settingsDigest,
      inputSha256: createHash('sha256').update(original.original).digest('hex'),
      inputName: 'lyra-small.fits',
      width: 64,
      height: 64,
    });
    expect(detail.components.map((c) => c.name).sort()).toEqual(
      ['compact', 'compactSky', 'diffuse', 'diffuseSky', 'model', 'residual', 'residualNorm'].sort(),
    );
  });

  it('stores diagnostics: the residual histogram covers every pixel, the spectrum carries the fitted law', () => {
    const { residualHistogram, spectrum, convergence } = detail.diagnostics!;
    const total = residualHistogram.counts.reduce((a, b) => a + b, 0);
    expect(total).toBe(64 * 64);
    expect(residualHistogram.count).toBe(64 * 64);
    // A fit that explains the image leaves residuals of about unit spread (common practice: within 0.7–1.3).
    expect(residualHistogram.std).toBeGreaterThan(0.7);
    expect(residualHistogram.std).toBeLessThan(1.3);
    const k0 = spectrum.k[0]!;
    const expected = spectrum.amplitude * Math.pow(k0 * k0 + spectrum.turnover ** 2, -spectrum.slope / 2);
    expect(Math.abs(spectrum.fitted[0]! - expected)).toBeLessThanOrEqual(1e-12 * Math.abs(expected));
    expect(convergence.length).toBeGreaterThan(0);
    expect(new Set(convergence.map((c) => c.stage))).toContain('final');
  });

  it('recovers the simulated sources within their errors (known truth)', async () => {
    const response = await get(`/api/runs/${runId}/sources?pageSize=1000`);
    expect(response.status).toBe(200);
    const { sources, total } = response.body as SourcePage;
    expect(total).toBe(detail.sourceCount);
    expect(f.sky.truth.sources).toHaveLength(5);
    for (const truth of f.sky.truth.sources) {
      // Truth positions are 0-based; the catalogue is FITS 1-based.
      const match = sources.find((s) => Math.hypot(s.x - (truth.x + 1), s.y - (truth.y + 1)) < 1.5);
      expect(match, `no source near (${truth.x + 1}, ${truth.y + 1})`).toBeDefined();
      // 5σ tolerance on the flux: the stated error has to cover the truth (catalogue standard).
      if (!match) continue;
      const tolerance = 5 * match.fluxErr;
      expect(
        Math.abs(match.flux - truth.flux),
        `flux: expected ${truth.flux}, got ${match.flux} ± ${match.fluxErr}, tolerance ${tolerance}`,
      ).toBeLessThan(tolerance);
    }
  });

  it('pages, sorts and filters the catalogue', async () => {
    const all = (await get(`/api/runs/${runId}/sources?pageSize=1000&sort=snr`)).body
      .sources as CatalogueSource[];
    const snrs = all.map((s) => s.snr);
    expect(snrs).toEqual([...snrs].sort((a, b) => a - b));
    const page2 = await get(`/api/runs/${runId}/sources?page=2&pageSize=2&sort=-snr`);
    expect((page2.body as SourcePage).sources.map((s) => s.id)).toEqual(
      [...all]
        .reverse()
        .slice(2, 4)
        .map((s) => s.id),
    );
    expect(page2.body).toMatchObject({ page: 2, pageSize: 2, total: all.length });
    const threshold = snrs[2]!;
    const bright = await get(`/api/runs/${runId}/sources?minSnr=${threshold}&pageSize=1000`);
    expect(bright.body.total).toBe(all.filter((s) => s.snr >= threshold).length);
    const edge = await get(`/api/runs/${runId}/sources?flags=edge&pageSize=1000`);
    expect(edge.body.total).toBe(all.filter((s) => s.flags.includes('edge')).length);
    const none = await get(`/api/runs/${runId}/sources?flags=none&pageSize=1000`);
    expect(none.body.total).toBe(all.filter((s) => s.flags.length === 0).length);
    const bad = await get(`/api/runs/${runId}/sources?sort=brightness`);
    expect(bad.status).toBe(400);
    const badFlag = await get(`/api/runs/${runId}/sources?flags=wobbly`);
    expect(badFlag.status).toBe(400);
    expect(badFlag.body).toEqual(
      apiError('validation_failed', 'flags: Use a comma-separated list of edge, near-mask, blended, or none'),
    );
  });

  it('downloads the catalogue as CSV (RFC 4180, read back by csv-parse), VOTable and FITS', async () => {
    const json = (await get(`/api/runs/${runId}/sources?pageSize=1000&sort=id`)).body
      .sources as CatalogueSource[];
    const csv = await get(`/api/runs/${runId}/sources?format=csv&sort=id`);
    expect(csv.status).toBe(200);
    expect(csv.headers['content-type']).toMatch(/^text\/csv/);
    expect(csv.headers['content-disposition']).toBe(
      `attachment; filename="skysieve-run-${runId}-sources.csv"`,
    );
    const records = parseCsv(csv.text, { columns: true }) as Record<string, string>[];
    expect(Object.keys(records[0]!)).toEqual(sourceColumns('Jy/beam').map((c) => c.name));
    expect(records).toHaveLength(json.length);
    for (const [i, record] of records.entries()) {
      const source = json[i]!;
      expect(Number(record.id)).toBe(source.id);
      // Shortest round-trip number text: the CSV value parses back to exactly the stored double.
      expect(Number(record.x)).toBe(source.x);
      expect(Number(record.flux)).toBe(source.flux);
      expect(Number(record.snr)).toBe(source.snr);
      expect(Number(record.ra)).toBe(source.ra);
      expect(record.flags).toBe(source.flags.join('|'));
    }

    const votable = await get(`/api/runs/${runId}/sources?format=votable`);
    expect(votable.status).toBe(200);
    const xml = new XMLParser({ ignoreAttributes: false }).parse(votable.text);
    const rows = xml.VOTABLE.RESOURCE.TABLE.DATA.TABLEDATA.TR;
    expect(Array.isArray(rows) ? rows.length : 1).toBe(json.length);

    const fits = await get(`/api/runs/${runId}/sources?format=fits`).buffer(true).parse(binaryParser);
    expect(fits.status).toBe(200);
    const bytes = new Uint8Array(fits.body as Buffer);
    const primary = parseHeader(bytes, 0)!;
    const extension = parseHeader(bytes, primary.dataOffset)!;
    const cards = new Map(extension.cards.map((card) => [card.keyword, card.value]));
    expect(cards.get('XTENSION')).toBe('BINTABLE');
    expect(cards.get('NAXIS2')).toBe(json.length);
  });

  it('serves components as FITS with the input WCS and as float32 views with ETag caching', async () => {
    const fits = await get(`/api/runs/${runId}/components/model?format=fits`)
      .buffer(true)
      .parse(binaryParser);
    expect(fits.status).toBe(200);
    const model = readImage(new Uint8Array(fits.body as Buffer), { fileName: 'model.fits' });
    const input = new Map(f.sky.header.map((card) => [card.keyword, card.value]));
    const written = new Map(model.header.map((card) => [card.keyword, card.value]));
    for (const keyword of ['CTYPE1', 'CTYPE2', 'CRVAL1', 'CRVAL2', 'CRPIX1', 'CRPIX2', 'BMAJ', 'BUNIT']) {
      expect(written.get(keyword), keyword).toEqual(input.get(keyword));
    }

    const planes: Record<string, Float32Array> = {};
    for (const name of ['model', 'diffuse', 'compact', 'residual']) {
      const response = await get(`/api/runs/${runId}/components/${name}`).buffer(true).parse(binaryParser);
      expect(response.status).toBe(200);
      expect(response.headers['x-plane-width']).toBe('64');
      planes[name] = float32(response.body as Buffer);
    }
    // The FITS plane and the float32 view are the same numbers.
    expect(Array.from(model.data)).toEqual(Array.from(planes.model!));
    // Identities of the model (server/engine/separate.ts): model = diffuse + compact, residual = data − model.
    for (let i = 0; i < 64 * 64; i += 97) {
      expect(Math.abs(planes.model![i]! - planes.diffuse![i]! - planes.compact![i]!)).toBeLessThan(1e-6);
      const data = Math.fround(f.sky.image[i]!);
      expect(Math.abs(planes.residual![i]! - (data - planes.model![i]!))).toBeLessThan(1e-7);
    }

    const small = await get(`/api/runs/${runId}/components/model?maxSize=32`)
      .buffer(true)
      .parse(binaryParser);
    expect([
      small.headers['x-plane-width'],
      small.headers['x-plane-height'],
      small.headers['x-plane-factor'],
    ]).toEqual(['32', '32', '2']);
    const view = float32(small.body as Buffer);
    // Block mean of the 2 × 2 block at view pixel (5, 7), computed here from the full plane.
    const m = planes.model!;
    const block = (m[14 * 64 + 10]! + m[14 * 64 + 11]! + m[15 * 64 + 10]! + m[15 * 64 + 11]!) / 4;
    expect(Math.abs(view[7 * 32 + 5]! - block)).toBeLessThan(1e-7);
    const etag = small.headers.etag as string;
    expect(etag).toMatch(/^"run-/);
    const again = await owner.agent
      .get(`/api/runs/${runId}/components/model?maxSize=32`)
      .set('if-none-match', etag);
    expect(again.status).toBe(304);
    const unknown = await get(`/api/runs/${runId}/components/sky`);
    expect(unknown.status).toBe(400);
  });

  it('cuts out pixels around a source', async () => {
    const brightest = (await get(`/api/runs/${runId}/sources?pageSize=1`)).body.sources[0];
    const response = await get(`/api/runs/${runId}/cutout?x=${brightest.x}&y=${brightest.y}&size=9`);
    expect(response.status).toBe(200);
    const { x0, y0, width, values } = response.body;
    expect(width).toBe(9);
    const cx = Math.round(brightest.x);
    const cy = Math.round(brightest.y);
    expect([x0, y0]).toEqual([cx - 4, cy - 4]);
    const centre = values[4 * 9 + 4];
    expect(centre).toBe(Math.fround(f.sky.image[(cy - 1) * 64 + (cx - 1)]!));
    const outside = await get(`/api/runs/${runId}/cutout?x=500&y=3`);
    expect(outside.status).toBe(400);
    expect(outside.body).toEqual(
      apiError(
        'bad_request',
        'The cutout centre (500, 3) lies outside the 64 × 64 image (pixels 1…64, 1…64).',
      ),
    );
  });

  it('e-mails the owner, who asked for it, with a link', async () => {
    const mail = await mailTo(t.ctx, f.owner.email);
    const finished = mail.find((m) => m.subject.includes(`Run ${runId} `));
    expect(finished?.subject).toBe(`Run ${runId} on lyra-small.fits finished`);
    expect(finished?.text).toContain(`http://skysieve.test/runs/${runId}`);
  });

  it('deletes a finished run and gives its storage back; a running one cannot be deleted', async () => {
    const extra = await owner.post(`/api/images/${f.imageId}/runs`, { settings: fastSettings });
    const finished = await waitForRun(
      get,
      extra.body.id,
      (body) => !['queued', 'running'].includes(body.status),
    );
    expect(finished.status).toBe('succeeded');
    const before = (await User.query().findById(f.owner.id))!.bytesUsed;
    const removed = await owner.delete(`/api/runs/${extra.body.id}`);
    expect(removed.status).toBe(204);
    const after = (await User.query().findById(f.owner.id))!.bytesUsed;
    // The release trigger of migrations/202612020600-create-runs.ts, in the deleting transaction.
    expect(before - after).toBe(finished.resultBytes);
    expect((await get(`/api/runs/${extra.body.id}`)).status).toBe(404);
    const planes = await t.ctx.knex('run_components').where('runId', extra.body.id).count({ n: '*' });
    expect(Number(planes[0]!.n)).toBe(0);
  }, 90_000);

  it('lists the runs of the image', async () => {
    const response = await get(`/api/images/${f.imageId}/runs`);
    expect(response.status).toBe(200);
    expect(response.body.runs.map((r: { id: number }) => r.id)).toContain(runId);
  });
});

describe('cancel, events and failure', () => {
  // A fit that would run for minutes (tiny stopping rule, large budget) until it is cancelled.
  const slowSettings = {
    ...fastSettings,
    maxIterations: 20000,
    absoluteDecrease: 1e-9,
    settleTolerance: 1e-9,
    preset: 'deep-search',
  };
  // The slow fits run on a 192² image: on 64² even this budget ends within a second on a fast machine.
  let slowImageId: number;
  beforeAll(async () => {
    slowImageId = await storeImage(t.ctx, f.project.id, f.owner, smallSky(13, 192), 'lyra-slow.fits');
  });

  it('cancels a queued run at once and a running one through its worker', async () => {
    const slow = await editor.post(`/api/images/${slowImageId}/runs`, { settings: slowSettings });
    expect(slow.status).toBe(202);
    await waitForRun(get, slow.body.id, (body) => body.status === 'running' && body.progress !== null);
    // The worker (concurrency 1) is busy: this one stays queued.
    const queued = await editor.post(`/api/images/${f.imageId}/runs`, { settings: fastSettings });
    const cancelQueued = await editor.post(`/api/runs/${queued.body.id}/cancel`);
    expect(cancelQueued.status).toBe(200);
    expect(cancelQueued.body).toMatchObject({
      id: queued.body.id,
      status: 'cancelled',
      cancelRequested: true,
    });
    const again = await editor.post(`/api/runs/${queued.body.id}/cancel`);
    expect(again.status).toBe(409);
    expect(again.body).toEqual(
      apiError('conflict', `Run ${queued.body.id} has already been cancelled; there is nothing to cancel.`),
    );

    const deleteRunning = await editor.delete(`/api/runs/${slow.body.id}`);
    expect(deleteRunning.status).toBe(409);
    expect(deleteRunning.body).toEqual(
      apiError(
        'conflict',
        `Run ${slow.body.id} is running; cancel it and wait until it has stopped before deleting it.`,
      ),
    );
    const cancelRunning = await editor.post(`/api/runs/${slow.body.id}/cancel`);
    expect(cancelRunning.status).toBe(200);
    expect(cancelRunning.body).toMatchObject({ status: 'running', cancelRequested: true });
    const ended = await waitForRun(get, slow.body.id, (body) => body.status !== 'running', 30_000);
    expect(ended.status).toBe('cancelled');
    const sourceRows = await t.ctx.knex('run_sources').where('runId', slow.body.id).count({ n: '*' });
    expect(Number(sourceRows[0]!.n)).toBe(0);
    const rows = await t.ctx.knex('run_components').where('runId', slow.body.id).count({ n: '*' });
    expect(Number(rows[0]!.n)).toBe(0);
    const sources = await get(`/api/runs/${slow.body.id}/sources`);
    expect(sources.status).toBe(409);
    expect(sources.body).toEqual(
      apiError('conflict', `Run ${slow.body.id} was cancelled and has no results.`),
    );
    // The queued one never started.
    const neverStarted = (await get(`/api/runs/${queued.body.id}`)).body;
    expect(neverStarted).toMatchObject({ status: 'cancelled', attempts: 0 });
  }, 90_000);

  it('streams status and progress as Server-Sent Events and closes at the end', async () => {
    // 160² and the whole iteration budget (no settle stop) so that the fit lasts a few seconds, longer than the
    // stream's 0.5 s database poll, and progress is seen.
    const imageId = await storeImage(t.ctx, f.project.id, f.owner, smallSky(12, 160), 'lyra-sse.fits');
    const started = await owner.post(`/api/images/${imageId}/runs`, {
      settings: { ...fastSettings, settleTolerance: 1e-9 },
    });
    const response = await owner.agent
      .get(`/api/runs/${started.body.id}/events`)
      .buffer(true)
      .parse(textParser);
    expect(response.status).toBe(200);
    expect(response.headers['content-type']).toMatch(/^text\/event-stream/);
    const events = parseSse(response.body as string);
    expect(events.length).toBeGreaterThanOrEqual(2);
    const last = events[events.length - 1]!;
    expect(last.event).toBe('end');
    expect(last.data).toMatchObject({ id: started.body.id, status: 'succeeded' });
    const progress = events.filter(
      (e) => e.event === 'run' && e.data.status === 'running' && e.data.progress,
    );
    expect(progress.length, JSON.stringify(events)).toBeGreaterThanOrEqual(1);
    for (const { data } of progress) {
      expect(data.progress!.fraction).toBeGreaterThanOrEqual(0);
      expect(data.progress!.fraction).toBeLessThanOrEqual(1);
      expect(typeof data.progress!.stage).toBe('string');
    }
  }, 90_000);

  it('stores why a run failed and e-mails it', async () => {
    // The simulated map holds non-integer values: the Poisson likelihood refuses them (server/engine/separate.ts).
    const started = await owner.post(`/api/images/${f.imageId}/runs`, {
      settings: { ...fastSettings, likelihood: 'poisson' },
    });
    expect(started.status).toBe(202);
    const ended = await waitForRun(
      get,
      started.body.id,
      (body) => body.status !== 'queued' && body.status !== 'running',
    );
    expect(ended.status).toBe('failed');
    expect(ended.errorMessage).toMatch(
      /^Poisson likelihood needs counts \(whole numbers ≥ 0\), but pixel \(\d+, \d+\) holds .*; use the gaussian likelihood for this image$/,
    );
    const mail = await mailTo(t.ctx, f.owner.email);
    const failed = mail.find((m) => m.subject === `Run ${started.body.id} on lyra-small.fits failed`);
    expect(failed?.text).toContain('Reason: Poisson likelihood needs counts');
  }, 90_000);

  it('stops a run at its time limit and stores why', async () => {
    // Straight into the table (no job): only this direct call of the job handler runs it.
    const run = await insertQueuedRun(slowSettings, slowImageId);
    await processRunJob(t.ctx, run, { runTimeoutMs: 1500, pollMs: 100 });
    const stored = (await get(`/api/runs/${run}`)).body as RunDetail;
    expect(stored.status).toBe('failed');
    expect(stored.errorMessage).toBe(
      'The run took longer than the time limit of 0.03 minutes (RUN_TIMEOUT_MINUTES) and was stopped.',
    );
    expect(stored.attempts).toBe(1);
  }, 60_000);

  it('gives a run back to the queue when its worker shuts down', async () => {
    const run = await insertQueuedRun(slowSettings, slowImageId);
    const shutdown = new AbortController();
    const job = processRunJob(t.ctx, run, { runTimeoutMs: 60_000, shutdown: shutdown.signal, pollMs: 100 });
    await waitForRun(get, run, (body) => body.status === 'running');
    shutdown.abort();
    await expect(job).rejects.toThrow('The worker shut down before the run finished; it will be run again.');
    const stored = (await get(`/api/runs/${run}`)).body as RunDetail;
    expect(stored).toMatchObject({ status: 'queued', attempts: 1, errorMessage: null });
  }, 60_000);

  it('marks a run whose job used up its retries (dead letter) failed, or cancelled when that was asked', async () => {
    const lost = await insertQueuedRun(fastSettings);
    const cancelled = await insertQueuedRun(fastSettings);
    await Run.query().patch({ status: 'running', attempts: 3 }).whereIn('id', [lost, cancelled]);
    await Run.query().patch({ cancelRequested: true }).where('id', cancelled);
    await markRunLost(t.ctx, lost, 3);
    await markRunLost(t.ctx, cancelled, 3);
    expect((await get(`/api/runs/${lost}`)).body).toMatchObject({
      status: 'failed',
      errorMessage:
        'The run was started 3 times and its worker stopped each time before it finished (the worker process ended or the run exceeded its time limit).',
    });
    expect((await get(`/api/runs/${cancelled}`)).body).toMatchObject({
      status: 'cancelled',
      errorMessage: null,
    });
  });

  it('refuses bad settings with the schema message', async () => {
    const response = await owner.post(`/api/images/${f.imageId}/runs`, { settings: { threshold: -1 } });
    expect(response.status).toBe(400);
    expect(response.body.error.message).toMatch(/^settings\.threshold: /);
    const unknownField = await owner.post(`/api/images/${f.imageId}/runs`, { settings: { wobble: 1 } });
    expect(unknownField.status).toBe(400);
  });
});

describe('the scripted journey (issue 5, "done when")', () => {
  it('signs in with a token, creates a project, uploads, runs, follows and downloads through the API alone', async () => {
    const token = (await createToken(f.editor, 'journey script', null)).token;
    const auth = { authorization: `Bearer ${token}` };
    const project = await request(t.app)
      .post('/api/projects')
      .set(auth)
      .send({ name: 'AWS scripted journey' });
    expect(project.status, JSON.stringify(project.body)).toBe(201);
    const sky = smallSky(23);
    const fits = Buffer.from(
      writeFits({ width: sky.width, height: sky.height, data: sky.image }, { header: sky.header }),
    );
    const upload = await request(t.app)
      .post(`/api/projects/${project.body.id}/images`)
      .set(auth)
      .attach('file', fits, 'lyra-journey.fits');
    expect(upload.status, JSON.stringify(upload.body)).toBe(201);
    const started = await request(t.app)
      .post(`/api/images/${upload.body.id}/runs`)
      .set(auth)
      .send({ settings: fastSettings });
    expect(started.status).toBe(202);
    const events = await request(t.app)
      .get(`/api/runs/${started.body.id}/events`)
      .set(auth)
      .buffer(true)
      .parse(textParser);
    const last = parseSse(events.body as string).at(-1);
    expect(last?.data.status).toBe('succeeded');
    const csv = await request(t.app).get(`/api/runs/${started.body.id}/sources?format=csv`).set(auth);
    expect(csv.status).toBe(200);
    const records = parseCsv(csv.text, { columns: true }) as Record<string, string>[];
    expect(records.length).toBe(
      (await request(t.app).get(`/api/runs/${started.body.id}`).set(auth)).body.sourceCount,
    );
    const component = await request(t.app)
      .get(`/api/runs/${started.body.id}/components/diffuse?format=fits`)
      .set(auth)
      .buffer(true)
      .parse(binaryParser);
    expect(component.status).toBe(200);
    expect(readImage(new Uint8Array(component.body as Buffer), { fileName: 'diffuse.fits' }).width).toBe(64);
  }, 90_000);
});

// ---- helpers ----

async function insertQueuedRun(settings: object, imageId = f.imageId): Promise<number> {
  const run = await Run.query().insertAndFetch({
    imageId,
    projectId: f.project.id,
    createdBy: f.owner.id,
    status: 'queued',
    requestedSettings: settings as Record<string, unknown>,
    settings: {},
    settingsDigest: '0'.repeat(64),
    attempts: 0,
    cancelRequested: false,
    resultBytes: 0,
  });
  return run.id;
}

// eslint-disable-next-line @typescript-eslint/no-explicit-any
function binaryParser(res: any, callback: (error: Error | null, body: Buffer) => void) {
  const chunks: Buffer[] = [];
  res.on('data', (chunk: Buffer) => chunks.push(chunk));
  res.on('end', () => callback(null, Buffer.concat(chunks)));
}

// eslint-disable-next-line @typescript-eslint/no-explicit-any
function textParser(res: any, callback: (error: Error | null, body: string) => void) {
  let text = '';
  res.on('data', (chunk: Buffer) => (text += chunk.toString('utf8')));
  res.on('end', () => callback(null, text));
}

function float32(bytes: Buffer): Float32Array {
  const out = new Float32Array(bytes.byteLength / 4);
  for (let i = 0; i < out.length; i++) out[i] = bytes.readFloatLE(i * 4);
  return out;
}

/** Splits an event stream into its events (HTML Living Standard §9.2.6, the parts these tests use). */
function parseSse(text: string): { event: string; data: RunEvent }[] {
  return text
    .split('\n\n')
    .map((block) => block.split('\n').filter((line) => line !== '' && !line.startsWith(':')))
    .filter((lines) => lines.some((line) => line.startsWith('data:')))
    .map((lines) => ({
      event:
        lines
          .find((line) => line.startsWith('event:'))
          ?.slice(6)
          .trim() ?? 'message',
      data: JSON.parse(
        lines
          .filter((line) => line.startsWith('data:'))
          .map((line) => line.slice(5).trim())
          .join('\n'),
      ),
    }));
}
