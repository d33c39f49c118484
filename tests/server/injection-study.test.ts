// @vitest-environment node
/**
 * Injection studies end to end through the API and the queue, with a run worker and an injection worker started
 * here (pg-boss on the test database, every trial separated in a fit thread) on a 96 × 96 simulated image
 * (samples/sky-simulator.ts, seeded): validation and refusals, a study at a bright and a very faint SNR level,
 * reproducible positions, cancel, the exports read back, and the number counts corrected with the study.
 * Outside references: the Wilson score interval (E. B. Wilson, JASA 22, 209, 1927) recomputed here; the Gehrels
 * (1986, ApJ 303, 336) eq. 7/12 limits; RFC 4180 CSV read by csv-parse; VOTable read by fast-xml-parser; the FITS
 * table and the VOTable read back by astropy.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';

import { parse as parseCsv } from 'csv-parse/sync';
import { XMLParser } from 'fast-xml-parser';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import type { InjectionStudyDetail, NumberCounts } from '../../shared/injection';
import { COMPLETENESS_CAUTION_TEXT } from '../../shared/injection';
import { COMPLETENESS_CAUTION } from '../../server/catalogue/completeness';
import { startInjectionWorker } from '../../server/queue/injection-worker';
import { configureRunQueue, stopRunQueue } from '../../server/queue/run-queue';
import { type RunWorker, startRunWorker } from '../../server/queue/run-worker';
import { readBackWithAstropy } from '../catalogue/astropy-read-back';
import { type BrowserClient, signIn, startTestApp, type TestApp } from '../support/test-app';
import { fastSettings, type RunFixture, runFixture, smallSky, waitForRun } from './runs/run-support';

let t: TestApp;
let runWorker: RunWorker;
let injectionWorker: RunWorker;
let f: RunFixture;
let owner: BrowserClient;
let runId = 0;

beforeAll(async () => {
  t = await startTestApp();
  configureRunQueue(t.ctx, { pollingIntervalSeconds: 0.5 });
  const queueOptions = { concurrency: 1, pollingIntervalSeconds: 0.5, maintenanceIntervalSeconds: 5 };
  runWorker = await startRunWorker(t.ctx, queueOptions);
  injectionWorker = await startInjectionWorker(t.ctx, queueOptions);
  f = await runFixture(t.ctx, smallSky(23, 96));
  owner = await signIn(t.app, f.owner.email);
  const created = await owner.post(`/api/images/${f.imageId}/runs`, { settings: fastSettings });
  expect(created.status, JSON.stringify(created.body)).toBe(202);
  runId = created.body.id;
  const run = await waitForRun(
    (path) => owner.get(path),
    runId,
    (body) => ['succeeded', 'failed', 'cancelled'].includes(body.status),
  );
  expect(run.status, JSON.stringify(run.errorMessage)).toBe('succeeded');
}, 120_000);

afterAll(async () => {
  await injectionWorker?.stop();
  await runWorker?.stop();
  await stopRunQueue(t.ctx);
  await t.close();
});

const base = () => `/api/runs/${runId}/injection-studies`;

async function waitForStudy(studyId: number, timeoutMs = 150_000): Promise<InjectionStudyDetail> {
  const started = Date.now();
  for (;;) {
    const response = await owner.get(`${base()}/${studyId}`);
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    const body = response.body as InjectionStudyDetail;
    if (['succeeded', 'failed', 'cancelled'].includes(body.status)) return body;
    if (Date.now() - started > timeoutMs) throw new Error(`Study ${studyId} still ${body.status}`);
    await new Promise((resolve) => setTimeout(resolve, 300));
  }
}

/** Wilson score interval at z = 1 written out (Wilson 1927), independent of the server's code. */
function wilson(k: number, n: number): [number, number] {
  const p = k / n;
  const centre = (p + 1 / (2 * n)) / (1 + 1 / n);
  const half = Math.sqrt((p * (1 - p)) / n + 1 / (4 * n * n)) / (1 + 1 / n);
  return [Math.max(0, centre - half), Math.min(1, centre + half)];
}

describe('refusals', () => {
  it('answers 400 with the field problems for bad levels and counts', async () => {
    const cases: [object, string][] = [
      [{ levels: [] }, 'Give at least one level'],
      [{ levels: Array.from({ length: 13 }, (_, k) => k + 1) }, 'Give at most 12 levels'],
      [{ levels: [5, 5] }, 'Levels must all differ'],
      [{ levels: [-1] }, 'Every level must be a positive number'],
      [{ levels: [5], sourcesPerLevel: 201 }, 'Inject at most 200 sources per level'],
      [{ levels: [5], sourcesPerLevel: 2.5 }, 'Sources per level must be a whole number'],
      [{ levels: [5], radiusFwhm: 1 }, 'Keep sources at least 3 FWHM apart'],
    ];
    for (const [body, message] of cases) {
      const response = await owner.post(base(), body);
      expect(response.status, JSON.stringify(body)).toBe(400);
      expect(JSON.stringify(response.body.error.details)).toContain(message);
    }
  });

  it('answers 422 when the image cannot hold the sources asked for', async () => {
    const far = await owner.post(base(), { levels: [10], radiusFwhm: 10 });
    expect(far.status).toBe(422);
    expect(far.body.error.message).toMatch(/cannot hold an artificial source 30\.0 pixels \(10 FWHM\)/);
    const many = await owner.post(base(), {
      levels: [3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14],
      sourcesPerLevel: 200,
    });
    expect(many.status).toBe(422);
    expect(many.body.error.message).toMatch(
      /would need \d+ separations \(the most is 60\); use at most \d+ sources per level/,
    );
    // Nothing was stored by the refusals.
    expect((await owner.get(base())).body.studies).toEqual([]);
  });

  it('answers 409 for a run that has not succeeded', async () => {
    const queued = await owner.post(`/api/images/${f.imageId}/runs`, {
      settings: { ...fastSettings, maxIterations: 10 },
    });
    await owner.post(`/api/runs/${queued.body.id}/cancel`);
    const response = await owner.post(`/api/runs/${queued.body.id}/injection-studies`, { levels: [10] });
    expect(response.status).toBe(409);
    expect(response.body.error.message).toMatch(/completeness can be measured once the run has succeeded/);
  });
});

describe('a study at a bright and a very faint level', () => {
  let study: InjectionStudyDetail;
  const request = { levelKind: 'snr', levels: [40, 1.5], sourcesPerLevel: 6, seed: 7 };

  beforeAll(async () => {
    const response = await owner.post(base(), request);
    expect(response.status, JSON.stringify(response.body)).toBe(202);
    expect(response.headers.location).toBe(`${base()}/${response.body.id}`);
    expect(response.body).toMatchObject({ status: 'queued', levels: [40, 1.5], seed: 7, trialsDone: 0 });
    study = await waitForStudy(response.body.id);
    expect(study.status, study.errorMessage ?? '').toBe('succeeded');
  }, 180_000);

  it('queued one separation per trial image plus the false-source trial, all succeeded', () => {
    const injection = study.trials.filter((trial) => trial.kind === 'injection');
    expect(study.trials.filter((trial) => trial.kind === 'false-source')).toHaveLength(1);
    expect(study.trialsTotal).toBe(study.trials.length);
    expect(study.trialsDone).toBe(study.trials.length);
    expect(study.trials.every((trial) => trial.status === 'succeeded' && trial.attempts === 1)).toBe(true);
    for (const level of [0, 1]) {
      const injected = injection.filter((trial) => trial.level === level).flatMap((trial) => trial.injected);
      expect(injected).toHaveLength(6);
    }
  });

  it('kept the artificial sources ≥ 3 FWHM from each other, from detected sources and from the edge', async () => {
    const sources = (await owner.get(`/api/runs/${runId}/sources?pageSize=1000`)).body.sources as {
      x: number;
      y: number;
    }[];
    expect(sources.length).toBeGreaterThan(0);
    const radius = study.radiusPixels;
    expect(radius).toBeCloseTo(9, 6); // 3 × the 3-pixel FWHM of fastSettings
    for (const trial of study.trials) {
      for (const [i, a] of trial.injected.entries()) {
        expect(a.x).toBeGreaterThanOrEqual(0.5 + radius);
        expect(a.x).toBeLessThanOrEqual(96.5 - radius);
        for (const s of sources) expect(Math.hypot(a.x - s.x, a.y - s.y)).toBeGreaterThanOrEqual(radius);
        for (const b of trial.injected.slice(i + 1))
          expect(Math.hypot(a.x - b.x, a.y - b.y)).toBeGreaterThanOrEqual(radius);
      }
    }
  });

  it('measures completeness ≈ 1 at SNR 40 and low at SNR 1.5, with Wilson intervals', () => {
    const [bright, faint] = study.results!.levels;
    expect(bright!.injected).toBe(6);
    expect(bright!.recovered).toBeGreaterThanOrEqual(5);
    expect(faint!.recovered).toBeLessThanOrEqual(1);
    for (const level of [bright!, faint!]) {
      const [low, high] = wilson(level.recovered, level.injected);
      expect(level.completenessLow).toBeCloseTo(low, 12);
      expect(level.completenessHigh).toBeCloseTo(high, 12);
    }
    // SNR → flux: flux = SNR · σ / √Σpsf² (σ = 1e-4 given); the stored SNR goes back to the level asked for.
    expect(bright!.snr).toBeCloseTo(40, 9);
    expect(study.fluxes[0]! / study.fluxes[1]!).toBeCloseTo(40 / 1.5, 9);
    // A bright isolated source's flux comes back within a few per cent (its error is 1/40 of the flux).
    expect(Math.abs(bright!.fluxBias!)).toBeLessThan(0.1);
    expect(bright!.fluxScatter!).toBeLessThan(0.15);
    expect(study.results!.caution).toBe(COMPLETENESS_CAUTION);
    expect(COMPLETENESS_CAUTION_TEXT).toBe(COMPLETENESS_CAUTION);
  });

  it('reports the false-source rate from the source-subtracted image, per deg² with Gehrels limits', () => {
    const falseSources = study.results!.falseSources;
    expect(falseSources.areaUnit).toBe('deg2');
    // 96² pixels of 1.5″: area = 9216 × (1.5/3600)² deg².
    expect(falseSources.area).toBeCloseTo(9216 * (1.5 / 3600) ** 2, 12);
    const count = falseSources.bins.reduce((sum, bin) => sum + bin.count, 0);
    expect(falseSources.totalRate).toBeCloseTo(count / falseSources.area, 6);
    const upper = count + Math.sqrt(count + 0.75) + 1; // Gehrels eq. 7
    expect(falseSources.totalRateHigh).toBeCloseTo(upper / falseSources.area, 6);
    expect(falseSources.detections).toBeGreaterThanOrEqual(count + falseSources.residualsExcluded);
    expect(falseSources.bins[0]!.snrLow).toBe(5);
  });

  it('exports the completeness table as CSV, VOTable and FITS', async () => {
    const csv = await owner.get(`${base()}/${study.id}/export?table=completeness&format=csv`);
    expect(csv.status).toBe(200);
    expect(csv.headers['content-type']).toMatch(/text\/csv/);
    const rows = parseCsv(csv.text, { columns: true, comment: '#' }) as Record<string, string>[];
    expect(rows).toHaveLength(2);
    expect(Number(rows[0]!.recovered)).toBe(study.results!.levels[0]!.recovered);
    expect(Number(rows[0]!.flux)).toBeCloseTo(study.fluxes[0]!, 12);
    expect(Number(rows[0]!.snr)).toBeCloseTo(40, 9);
    expect(Object.keys(rows[0]!).slice(0, 3)).toEqual(['flux', 'snr', 'injected']);
    const votable = await owner.get(`${base()}/${study.id}/export?table=false-sources&format=votable`);
    expect(votable.status).toBe(200);
    const xml = new XMLParser({ ignoreAttributes: false }).parse(votable.text);
    expect(xml.VOTABLE.RESOURCE.TABLE.DESCRIPTION).toContain('hold for this image and these settings only');
    const fits = await owner
      .get(`${base()}/${study.id}/export?format=fits`)
      .buffer(true)
      .parse((res, done) => {
        const chunks: Buffer[] = [];
        res.on('data', (chunk: Buffer) => chunks.push(chunk));
        res.on('end', () => done(null, Buffer.concat(chunks)));
      });
    expect(fits.status).toBe(200);
    const bytes = fits.body as Buffer;
    expect(bytes.subarray(0, 30).toString('latin1')).toMatch(/^SIMPLE {2}=\s+T/);
    expect(bytes.byteLength % 2880).toBe(0);
    // Outside reader: astropy (Debian's python3-astropy) reads the FITS table and the VOTable back.
    const folder = mkdtempSync(path.join(os.tmpdir(), 'skysieve-injection-'));
    try {
      writeFileSync(path.join(folder, 'c.fits'), bytes);
      writeFileSync(path.join(folder, 'f.xml'), votable.text);
      const read = readBackWithAstropy({
        fits: path.join(folder, 'c.fits'),
        votable: path.join(folder, 'f.xml'),
      });
      expect(read.fits.names.slice(0, 4)).toEqual(['flux', 'snr', 'injected', 'recovered']);
      expect(read.fits.rows).toHaveLength(2);
      expect(read.fits.rows[0][2]).toBe(6);
      expect(read.fits.rows[0][1]).toBeCloseTo(40, 9);
      expect(read.votable.rows).toHaveLength(study.results!.falseSources.bins.length);
    } finally {
      rmSync(folder, { recursive: true, force: true });
    }
  });

  it('corrects the number counts with the study where completeness is measured', async () => {
    const response = await owner.get(`/api/runs/${runId}/number-counts?bins=4`);
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    const counts = response.body as NumberCounts;
    expect(counts.studyId).toBe(study.id);
    expect(counts.areaUnit).toBe('deg2');
    expect(counts.bins).toHaveLength(4);
    expect(counts.bins.reduce((sum, bin) => sum + bin.count, 0)).toBe(counts.sources);
    // C(S) linear in log S between the two levels, the bright level's value above it (number-counts.ts),
    // written out here from the study's levels.
    const [bright, faint] = study.results!.levels;
    const completenessAt = (flux: number) =>
      flux >= bright!.flux
        ? bright!.completeness
        : faint!.completeness +
          ((bright!.completeness - faint!.completeness) * Math.log(flux / faint!.flux)) /
            Math.log(bright!.flux / faint!.flux);
    const corrected = counts.bins.filter((b) => b.corrected);
    expect(corrected.length).toBeGreaterThan(0);
    for (const bin of corrected) {
      expect(bin.completeness).toBeCloseTo(completenessAt(bin.fluxCentre), 12);
      expect(bin.corrected!.count).toBeGreaterThanOrEqual(bin.count);
      // Poisson limits scale with the correction: corrected high / corrected value = raw high / raw value.
      if (bin.count > 0) {
        expect(bin.corrected!.perArea.high / bin.corrected!.perArea.value).toBeCloseTo(
          bin.perArea.high / bin.perArea.value,
          9,
        );
      }
    }
  });

  it('lists the study', async () => {
    const list = await owner.get(base());
    expect(list.status).toBe(200);
    expect(list.body.studies.map((s: { id: number }) => s.id)).toContain(study.id);
  });
});

describe('seeds and cancel', () => {
  it('places the same sources for the same seed and others for another; cancel stops the study', async () => {
    const request = { levelKind: 'snr', levels: [40, 1.5], sourcesPerLevel: 6 };
    const first = await owner.post(base(), { ...request, seed: 99 });
    const again = await owner.post(base(), { ...request, seed: 99 });
    const other = await owner.post(base(), { ...request, seed: 100 });
    for (const r of [first, again, other]) expect(r.status, JSON.stringify(r.body)).toBe(202);
    const early = await owner.delete(`${base()}/${first.body.id}`);
    expect(early.status).toBe(409);
    expect(early.body.error.message).toMatch(/cancel it and wait until it has stopped/);
    // Cancel all three at once: their positions were fixed when they were made.
    for (const r of [first, again, other]) {
      const cancelled = await owner.post(`${base()}/${r.body.id}/cancel`);
      expect(cancelled.status, JSON.stringify(cancelled.body)).toBe(200);
      expect(cancelled.body.cancelRequested).toBe(true);
    }
    const [a, b, c] = await Promise.all([first, again, other].map((r) => waitForStudy(r.body.id)));
    const positions = (s: InjectionStudyDetail) => s.trials.map((trial) => trial.injected);
    expect(positions(b!)).toEqual(positions(a!));
    expect(positions(c!)).not.toEqual(positions(a!));
    for (const s of [a!, b!, c!]) {
      expect(s.status).toBe('cancelled');
      expect(s.results).toBeNull();
    }
    const again409 = await owner.post(`${base()}/${a!.id}/cancel`);
    expect(again409.status).toBe(409);
    const removed = await owner.delete(`${base()}/${a!.id}`);
    expect(removed.status).toBe(204);
    expect((await owner.get(`${base()}/${a!.id}`)).status).toBe(404);
  }, 120_000);
});
