// @vitest-environment node
/**
 * Authorization matrix for runs and their results. Actors: admin (not a member), owner, editor, viewer,
 * signed-in non-member, signed-out, and a Bearer token of the owner. Invisible → 404 (never 403), visible but
 * not allowed → 403, signed out → 401; refused calls change nothing. No worker runs here: new runs stay queued,
 * and the finished run the read routes use is written straight into the tables.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { float32ToBytes } from '../../../server/models/run-component';
import { Run } from '../../../server/models/run';
import { stopRunQueue } from '../../../server/queue/run-queue';
import {
  type Actor,
  actors,
  editorsStatuses,
  readStatuses,
  signInActors,
} from '../../support/authorization-actors';
import { BrowserClient, signIn, startTestApp, type TestApp } from '../../support/test-app';
import { fastSettings, insertRunRow, type RunFixture, runFixture, sourceRow } from './run-support';

type Caller = Pick<BrowserClient, 'get' | 'post' | 'delete'>;

let t: TestApp;
let f: RunFixture;
let finishedRunId = 0;
let callers: Map<Actor, Caller>;

beforeAll(async () => {
  t = await startTestApp();
  f = await runFixture(t.ctx);
  ({ callers } = await signInActors(t, f, 'runs matrix'));
  finishedRunId = await insertFinishedRun();
}, 60_000);

afterAll(async () => {
  await stopRunQueue(t.ctx);
  await t.close();
});

async function insertFinishedRun(): Promise<number> {
  const run = await insertRunRow(f, { settingsDigest: 'f'.repeat(64), sourceCount: 1 });
  await t.ctx.knex('run_sources').insert(sourceRow(run.id, 1, { x: 10, y: 12 }));
  const data = float32ToBytes(new Float32Array(64 * 64).fill(1));
  await t.ctx
    .knex('run_components')
    .insert({ runId: run.id, name: 'model', width: 64, height: 64, data, byteSize: data.byteLength });
  return run.id;
}

interface Action {
  name: string;
  call(caller: Caller): Promise<{ status: number; body: { error?: { message: string } } }>;
  expected: Record<Actor, number>;
  /** Runs once before each actor's call (e.g. a fresh queued run to cancel). */
  prepare?(): Promise<void>;
}

let queuedRunId = 0;
const runCount = async () => Number((await t.ctx.knex('runs').count({ n: '*' }))[0]!.n);

const actions: Action[] = [
  {
    name: 'start a run',
    call: async (c) => c.post(`/api/images/${f.imageId}/runs`, { settings: fastSettings }),
    expected: editorsStatuses(202),
  },
  {
    name: 'list runs of the image',
    call: async (c) => c.get(`/api/images/${f.imageId}/runs`),
    expected: readStatuses,
  },
  { name: 'read a run', call: async (c) => c.get(`/api/runs/${finishedRunId}`), expected: readStatuses },
  {
    name: 'read its sources',
    call: async (c) => c.get(`/api/runs/${finishedRunId}/sources`),
    expected: readStatuses,
  },
  {
    name: 'download its sources',
    call: async (c) => c.get(`/api/runs/${finishedRunId}/sources?format=csv`),
    expected: readStatuses,
  },
  {
    name: 'read a component',
    call: async (c) => c.get(`/api/runs/${finishedRunId}/components/model?maxSize=16`),
    expected: readStatuses,
  },
  {
    name: 'cut out pixels',
    call: async (c) => c.get(`/api/runs/${finishedRunId}/cutout?x=10&y=12&size=5`),
    expected: readStatuses,
  },
  {
    name: 'cancel a queued run',
    prepare: async () => {
      const run = await Run.query().insertAndFetch({
        imageId: f.imageId,
        projectId: f.project.id,
        createdBy: f.owner.id,
        status: 'queued',
        requestedSettings: {},
        settings: {},
        settingsDigest: 'e'.repeat(64),
        attempts: 0,
        cancelRequested: false,
        resultBytes: 0,
      });
      queuedRunId = run.id;
    },
    call: async (c) => c.post(`/api/runs/${queuedRunId}/cancel`),
    expected: editorsStatuses(200),
  },
  {
    name: 'delete a finished run',
    prepare: async () => {
      queuedRunId = await insertFinishedRun();
    },
    call: async (c) => c.delete(`/api/runs/${queuedRunId}`),
    expected: editorsStatuses(204),
  },
];

it("refuses a run whose results would not fit the uploader's quota (413, nothing queued)", async () => {
  const small = await runFixture(t.ctx);
  // 7 float32 planes of 64 × 64 = 114 688 bytes are needed; leave less than that.
  await t.ctx.knex('users').where('id', small.owner.id).update({ quotaBytes: 100_000, bytesUsed: 40_000 });
  const client = await signIn(t.app, small.owner.email);
  const before = await runCount();
  const response = await client.post(`/api/images/${small.imageId}/runs`, { settings: fastSettings });
  expect(response.status).toBe(413);
  expect(response.body.error).toMatchObject({
    code: 'payload_too_large',
    details: { usedBytes: 40_000, quotaBytes: 100_000, neededBytes: 114_688 },
  });
  expect(response.body.error.message).toMatch(
    /^The results of this run would not fit the storage quota of the image's uploader\. Not enough storage: /,
  );
  expect(await runCount()).toBe(before);
});

describe.each(actions)('$name', (action) => {
  it.each(actors)('as %s', async (actor) => {
    await action.prepare?.();
    const before = await runCount();
    const response = await action.call(callers.get(actor)!);
    const expected = action.expected[actor];
    expect(response.status, `${action.name} as ${actor}: ${JSON.stringify(response.body)}`).toBe(expected);
    if (expected === 404) expect(response.body.error?.message).toMatch(/^(Image|Run) not found\.$/);
    if (expected === 401) expect(response.body.error?.message).toBe('Sign in to continue.');
    if (expected === 403)
      expect(response.body.error?.message).toBe(
        'Only project owners and editors can start, cancel or delete runs.',
      );
    if (action.name === 'start a run') expect(await runCount()).toBe(before + (expected === 202 ? 1 : 0));
    if (action.name === 'delete a finished run') {
      expect(await Run.query().findById(queuedRunId)).toEqual(expected === 204 ? undefined : expect.any(Run));
      const sources = await t.ctx.knex('run_sources').where('runId', queuedRunId).count({ n: '*' });
      expect(Number(sources[0]!.n)).toBe(expected === 204 ? 0 : 1);
    }
    if (action.name === 'cancel a queued run') {
      const run = await Run.query().findById(queuedRunId);
      expect(run!.status).toBe(expected === 200 ? 'cancelled' : 'queued');
    }
  });
});
