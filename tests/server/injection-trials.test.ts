// @vitest-environment node
/**
 * Injection trials when things go wrong, driven by calling the trial job directly (no injection worker): a trial
 * left running by a lost worker (what pg-boss hands out again after the job expires, as for runs in
 * runs/worker-kill.test.ts) is claimed again and finishes; a trial whose input is gone fails its study with the
 * message, cancels the study's other trials and does not throw (the worker goes on); the dead-letter handler fails
 * the trial and the study with why. A real run on a 96 × 96 simulated image (samples/sky-simulator.ts) comes first.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { markTrialLost, processTrialJob } from '../../server/injection/trial-job';
import { configureRunQueue, stopRunQueue } from '../../server/queue/run-queue';
import { type RunWorker, startRunWorker } from '../../server/queue/run-worker';
import { type BrowserClient, signIn, startTestApp, type TestApp } from '../support/test-app';
import { fastSettings, type RunFixture, runFixture, smallSky, waitForRun } from './runs/run-support';

let t: TestApp;
let runWorker: RunWorker;
let f: RunFixture;
let owner: BrowserClient;
let runId = 0;

beforeAll(async () => {
  t = await startTestApp();
  configureRunQueue(t.ctx, { pollingIntervalSeconds: 0.5 });
  runWorker = await startRunWorker(t.ctx, { concurrency: 1, pollingIntervalSeconds: 0.5 });
  f = await runFixture(t.ctx, smallSky(31, 96));
  owner = await signIn(t.app, f.owner.email);
  const created = await owner.post(`/api/images/${f.imageId}/runs`, { settings: fastSettings });
  runId = created.body.id;
  const run = await waitForRun(
    (path) => owner.get(path),
    runId,
    (body) => ['succeeded', 'failed', 'cancelled'].includes(body.status),
  );
  expect(run.status).toBe('succeeded');
}, 120_000);

afterAll(async () => {
  await runWorker?.stop();
  await stopRunQueue(t.ctx);
  await t.close();
});

async function newStudy(): Promise<{ studyId: number; trials: { id: number; kind: string }[] }> {
  const response = await owner.post(`/api/runs/${runId}/injection-studies`, {
    levels: [40],
    sourcesPerLevel: 2,
    seed: 3,
  });
  expect(response.status, JSON.stringify(response.body)).toBe(202);
  const trials = (await t.ctx
    .knex('injection_trials')
    .where('studyId', response.body.id)
    .orderBy('trialIndex')
    .select('id', 'kind')) as { id: number; kind: string }[];
  return { studyId: response.body.id, trials };
}

const studyRow = (id: number) =>
  t.ctx.knex('injection_studies').where('id', id).first('status', 'errorMessage', 'trialsDone', 'results');
const trialRow = (id: number) =>
  t.ctx.knex('injection_trials').where('id', id).first('status', 'attempts', 'errorMessage', 'recovered');
const options = { runTimeoutMs: 60_000, pollMs: 100 };

describe('injection trials', () => {
  it('take up a trial a lost worker left running, and aggregate when the last one ends', async () => {
    const { studyId, trials } = await newStudy();
    expect(trials.map((trial) => trial.kind)).toEqual(['injection', 'false-source']);
    // The first worker claimed the trial and died (kill -9): the row says running, attempt 1.
    await t.ctx
      .knex('injection_trials')
      .where('id', trials[0]!.id)
      .update({ status: 'running', attempts: 1 });
    await t.ctx.knex('injection_studies').where('id', studyId).update({ status: 'running' });
    await processTrialJob(t.ctx, trials[0]!.id, options);
    const retried = await trialRow(trials[0]!.id);
    expect(retried.status).toBe('succeeded');
    expect(retried.attempts).toBe(2);
    expect(retried.recovered.outcomes).toHaveLength(2);
    expect((await studyRow(studyId)).status).toBe('running');
    expect((await studyRow(studyId)).trialsDone).toBe(1);
    await processTrialJob(t.ctx, trials[1]!.id, options);
    const done = await studyRow(studyId);
    expect(done.status, done.errorMessage ?? '').toBe('succeeded');
    expect(done.trialsDone).toBe(2);
    expect(done.results.levels[0].injected).toBe(2);
    // A job delivered twice (pg-boss retried a job whose first worker did finish) changes nothing.
    await processTrialJob(t.ctx, trials[0]!.id, options);
    expect((await trialRow(trials[0]!.id)).attempts).toBe(2);
  }, 60_000);

  it('stops a running trial when its study is cancelled, and ends the study cancelled', async () => {
    const { studyId, trials } = await newStudy();
    const job = processTrialJob(t.ctx, trials[0]!.id, options);
    // Cancel as soon as the trial has been claimed (the fit thread takes longer than that to start and fit).
    for (let i = 0; i < 200 && (await trialRow(trials[0]!.id)).status !== 'running'; i++) {
      await new Promise((resolve) => setTimeout(resolve, 10));
    }
    const cancelled = await owner.post(`/api/runs/${runId}/injection-studies/${studyId}/cancel`);
    expect(cancelled.status).toBe(200);
    expect(cancelled.body.status).toBe('running');
    await job;
    expect((await trialRow(trials[0]!.id)).status).toBe('cancelled');
    expect((await trialRow(trials[1]!.id)).status).toBe('cancelled');
    expect((await studyRow(studyId)).status).toBe('cancelled');
  }, 60_000);

  it('fails the study with a lost trial’s reason (dead letter)', async () => {
    const { studyId, trials } = await newStudy();
    await markTrialLost(t.ctx, trials[0]!.id, 3);
    const study = await studyRow(studyId);
    expect(study.status).toBe('failed');
    expect(study.errorMessage).toBe(
      'Trial 1 of 2 failed: The trial was started 3 times and its worker stopped each time before it finished ' +
        '(the worker process ended or the trial exceeded its time limit).',
    );
    expect((await trialRow(trials[1]!.id)).status).toBe('cancelled');
    // A trial of a failed study is not run: it ends cancelled.
    await processTrialJob(t.ctx, trials[1]!.id, options);
    expect((await trialRow(trials[1]!.id)).attempts).toBe(0);
  });

  it('fails the study with the message when a trial cannot run, without throwing', async () => {
    const { studyId, trials } = await newStudy();
    // The run's compact component is gone (e.g. removed by hand): the false-source trial has nothing to subtract.
    await t.ctx.knex('run_components').where({ runId, name: 'compact' }).delete();
    await expect(processTrialJob(t.ctx, trials[1]!.id, options)).resolves.toBeUndefined();
    const study = await studyRow(studyId);
    expect(study.status).toBe('failed');
    expect(study.errorMessage).toBe(
      'Trial 2 of 2 failed: The run, its image or its compact component no longer exists.',
    );
    expect((await trialRow(trials[0]!.id)).status).toBe('cancelled');
    const detail = await owner.get(`/api/runs/${runId}/injection-studies/${studyId}`);
    expect(detail.body.status).toBe('failed');
    expect(detail.body.trials[1].errorMessage).toBe(
      'The run, its image or its compact component no longer exists.',
    );
  });
});
