// @vitest-environment node
/**
 * Injection studies and number counts: the authorization matrix (admin not a member, owner, editor, viewer,
 * non-member, signed out, owner's Bearer token; invisible → 404, visible but not allowed → 403, signed out → 401,
 * refused calls change nothing) and the number counts against a hand-computed example. No worker runs here:
 * new studies stay queued; the finished run and the finished study the reads use are written into the tables.
 *
 * Hand-computed counts (Gehrels 1986, ApJ 303, 336: upper λ_u ≈ n + √(n + 3/4) + 1, eq. 7; lower
 * λ_l ≈ n (1 − 1/(9n) − 1/(3√n))³, eq. 12). Fluxes 1.0, 1.5, 1.9 | 2, 3 | 4 (and 0.5 below the first edge) in bins
 * [1, 2) and [2, 4); 96 × 96 valid pixels of 1.5″ = 9216 × (1.5/3600)² = 0.0016 deg².
 *   bin 1: n = 3 → 3 / 0.0016 = 1875 deg⁻²; dN/dS = 1875 / 1 = 1875; limits 1.372 33 and 5.936 49 (× 625)
 *   bin 2: n = 2 → 2 / 0.0016 = 1250 deg⁻²; dN/dS = 1250 / 2 = 625
 * Completeness 0.5 at S = 1 rising to 1 at S = 4, linear in log S: C(1) = 0.5, C(1.5) = 0.646 24,
 * C(1.9) = 0.731 50 → corrected bin 1 = 2 + 1.547 41 + 1.367 05 = 4.914 46; C(2) = 0.75, C(3) = 0.896 24 →
 * corrected bin 2 = 1.333 33 + 1.115 77 = 2.449 11.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { resolveSettings } from '../../shared/separation-settings';
import { Run } from '../../server/models/run';
import { stopRunQueue } from '../../server/queue/run-queue';
import {
  type Actor,
  actors,
  editorsStatuses,
  readStatuses,
  signInActors,
} from '../support/authorization-actors';
import { BrowserClient, startTestApp, type TestApp } from '../support/test-app';
import { fastSettings, insertRunRow, type RunFixture, runFixture, smallSky } from './runs/run-support';

type Caller = Pick<BrowserClient, 'get' | 'post' | 'delete'>;

let t: TestApp;
let f: RunFixture;
let runId = 0;
let finishedStudyId = 0;
let callers: Map<Actor, Caller>;
const fluxes = [1.0, 1.5, 1.9, 2, 3, 4, 0.5];

beforeAll(async () => {
  t = await startTestApp();
  f = await runFixture(t.ctx, smallSky(11, 96));
  ({ callers } = await signInActors(t, f, 'injection matrix'));
  runId = await insertFinishedRun();
  finishedStudyId = await insertStudy('succeeded');
}, 60_000);

afterAll(async () => {
  await stopRunQueue(t.ctx);
  await t.close();
});

async function insertFinishedRun(): Promise<number> {
  const run = await insertRunRow(f, {
    requestedSettings: fastSettings,
    settings: resolveSettings(fastSettings) as unknown as Record<string, unknown>,
    settingsDigest: 'e'.repeat(64),
    sourceCount: fluxes.length,
  });
  await t.ctx
    .knex('runs')
    .where('id', run.id)
    .update({ diagnostics: JSON.stringify({ noise: { sigma: 1e-4 } }) });
  await t.ctx.knex('run_sources').insert(
    fluxes.map((flux, k) => ({
      runId: run.id,
      sourceId: k + 1,
      x: 15 + 10 * k,
      y: 20 + 8 * k,
      xErr: 0.1,
      yErr: 0.1,
      flux,
      fluxErr: 0.01,
      snr: flux / 0.01,
      flags: [],
    })),
  );
  return run.id;
}

const level = (index: number, flux: number, completeness: number) => ({
  level: index,
  flux,
  snr: null,
  injected: 10,
  recovered: Math.round(completeness * 10),
  completeness,
  completenessLow: Math.max(0, completeness - 0.1),
  completenessHigh: Math.min(1, completeness + 0.1),
  fluxBias: 0.01,
  fluxBiasErr: 0.02,
  fluxScatter: 0.05,
  pullMedian: 0,
  pullScatter: 1,
  medianSeparationPixels: 0.2,
});

async function insertStudy(status: 'queued' | 'succeeded' | 'cancelled'): Promise<number> {
  const results =
    status === 'succeeded'
      ? {
          levels: [level(0, 4, 1), level(1, 1, 0.5)],
          falseSources: {
            bins: [],
            detections: 0,
            residualsExcluded: 0,
            totalRate: 0,
            totalRateLow: 0,
            totalRateHigh: 1,
            area: 0.0016,
            areaUnit: 'deg2',
          },
          spuriousInTrials: 0,
          noiseSigma: 1e-4,
          psfFwhmPx: { major: 3, minor: 3 },
          fluxUnit: 'Jy.pixel/beam',
          threshold: 5,
          caution: 'hand-written study',
        }
      : null;
  const [row] = (await t.ctx
    .knex('injection_studies')
    .insert({
      runId,
      projectId: f.project.id,
      createdBy: f.owner.id,
      levelKind: 'flux',
      levels: JSON.stringify([4, 1]),
      fluxes: JSON.stringify([4, 1]),
      sourcesPerLevel: 10,
      seed: 1,
      radiusPixels: 9,
      matchRadiusPixels: 1.5,
      status,
      trialsTotal: 0,
      results: results ? JSON.stringify(results) : null,
      finishedAt: status === 'queued' ? null : new Date(),
    })
    .returning('id')) as { id: number }[];
  return row!.id;
}

const studyCount = async () => Number((await t.ctx.knex('injection_studies').count({ n: '*' }))[0]!.n);

describe('authorization', () => {
  const base = () => `/api/runs/${runId}`;

  it.each(actors)('%s: reads as the project role allows', async (actor) => {
    const caller = callers.get(actor)!;
    const expected = readStatuses[actor];
    expect((await caller.get(`${base()}/injection-studies`)).status).toBe(expected);
    expect((await caller.get(`${base()}/injection-studies/${finishedStudyId}`)).status).toBe(expected);
    expect(
      (await caller.get(`${base()}/injection-studies/${finishedStudyId}/export?format=csv`)).status,
    ).toBe(expected);
    expect((await caller.get(`${base()}/number-counts`)).status).toBe(expected);
  });

  it.each(actors)('%s: starts, cancels and deletes studies only as an editor', async (actor) => {
    const caller = callers.get(actor)!;
    const before = await studyCount();
    const created = await caller.post(`${base()}/injection-studies`, {
      levelKind: 'snr',
      levels: [10, 30],
      sourcesPerLevel: 4,
    });
    expect(created.status, JSON.stringify(created.body)).toBe(editorsStatuses(202)[actor]);
    expect(await studyCount()).toBe(before + (created.status === 202 ? 1 : 0));
    if (created.status === 403) {
      expect(created.body.error.message).toBe(
        'Only project owners and editors can start, cancel or delete runs.',
      );
    }
    const queued = await insertStudy('queued');
    expect((await caller.post(`${base()}/injection-studies/${queued}/cancel`)).status).toBe(
      editorsStatuses(200)[actor],
    );
    const finished = await insertStudy('cancelled');
    expect((await caller.delete(`${base()}/injection-studies/${finished}`)).status).toBe(
      editorsStatuses(204)[actor],
    );
  });

  it('answers 404 for a study of another run', async () => {
    const other = await Run.query().insertAndFetch({
      imageId: f.imageId,
      projectId: f.project.id,
      createdBy: f.owner.id,
      status: 'succeeded',
      requestedSettings: {},
      settings: {},
      settingsDigest: 'd'.repeat(64),
      attempts: 1,
      cancelRequested: false,
      resultBytes: 0,
    });
    const owner = callers.get('owner')!;
    const response = await owner.get(`/api/runs/${other.id}/injection-studies/${finishedStudyId}`);
    expect(response.status).toBe(404);
    expect(response.body.error.message).toBe('Injection study not found.');
  });
});

describe('number counts against the hand-computed example', () => {
  const close = (actual: number, expected: number, relative = 1e-5) =>
    expect(Math.abs(actual - expected)).toBeLessThanOrEqual(relative * Math.abs(expected));

  it('counts per bin per deg², with Gehrels limits, raw and corrected with the finished study', async () => {
    const response = await callers.get('viewer')!.get(`/api/runs/${runId}/number-counts?bins=1,2,4`);
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    const counts = response.body;
    expect(counts).toMatchObject({ areaUnit: 'deg2', sources: 7, studyId: finishedStudyId });
    close(counts.area, 0.0016, 1e-12);
    const [one, two] = counts.bins;
    expect([one.count, two.count]).toEqual([3, 2]);
    close(one.perArea.value, 1875);
    close(one.dnds.value, 1875);
    close(one.perArea.low, 1.37233 * 625, 1e-4);
    close(one.perArea.high, 5.93649 * 625, 1e-5);
    close(two.perArea.value, 1250);
    close(two.dnds.value, 625);
    close(one.corrected.count, 4.91446, 1e-5);
    close(two.corrected.count, 2.44911, 1e-5);
    close(one.corrected.perArea.value, 4.91446 / 0.0016, 1e-5);
    close(one.completeness, 0.625, 1e-9); // C(√2) = 0.5 + 0.5 · log √2 / log 4
    expect(counts.note).toMatch(/per deg⁻²/);
  });

  it('gives raw counts only for a named study that has not finished, and refuses bad bins', async () => {
    const queued = await insertStudy('queued');
    const owner = callers.get('owner')!;
    const refused = await owner.get(`/api/runs/${runId}/number-counts?studyId=${queued}`);
    expect(refused.status).toBe(409);
    expect(refused.body.error.message).toMatch(/only a finished study can correct the counts/);
    for (const bins of ['0', '51', '3,2,1', 'a,b', '5']) {
      const response = await owner.get(`/api/runs/${runId}/number-counts?bins=${bins}`);
      expect(response.status, bins).toBe(bins === '5' ? 200 : 400);
    }
    // A run that found nothing: an empty list, not an error.
    const empty = await Run.query().insertAndFetch({
      imageId: f.imageId,
      projectId: f.project.id,
      createdBy: f.owner.id,
      status: 'succeeded',
      requestedSettings: {},
      settings: {},
      settingsDigest: 'c'.repeat(64),
      attempts: 1,
      cancelRequested: false,
      resultBytes: 0,
      sourceCount: 0,
    });
    const none = await owner.get(`/api/runs/${empty.id}/number-counts`);
    expect(none.status).toBe(200);
    expect(none.body).toMatchObject({ sources: 0, bins: [], studyId: null });
    const csv = await owner.get(`/api/runs/${runId}/number-counts?bins=1,2,4&format=csv`);
    expect(csv.status).toBe(200);
    expect(csv.text).toContain('dnds_deg2');
  });
});
