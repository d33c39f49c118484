// @vitest-environment node
/**
 * Fault test: a worker process (`npx tsx server/worker.ts`) is killed with SIGKILL in the middle of a fit; a second
 * worker takes the job once its expiry has passed (pg-boss maintenance fails and retries it) and the run completes
 * exactly once: one set of source rows, seven component planes, the quota charged once, attempts = 2.
 */
import { type ChildProcess, spawn } from 'node:child_process';
import path from 'node:path';

import { afterAll, beforeAll, expect, it } from 'vitest';

import { User } from '../../../server/models/user';
import { configureRunQueue, stopRunQueue } from '../../../server/queue/run-queue';
import { type BrowserClient, signIn, startTestApp, type TestApp } from '../../support/test-app';
import { fastSettings, type RunFixture, runFixture, smallSky, waitForRun } from './run-support';

const root = path.resolve(import.meta.dirname, '../../..');
// Long enough for one fit on a busy 2-core machine, short enough for the test.
const EXPIRE_SECONDS = 30;

let t: TestApp;
let f: RunFixture;
let owner: BrowserClient;
const workers: ChildProcess[] = [];
const logs: string[] = [];

function startWorker(label: string): ChildProcess {
  const child = spawn(
    'npx',
    ['tsx', 'server/worker.ts', '--poll-seconds', '0.5', '--maintenance-seconds', '1'],
    {
      cwd: root,
      // Its own process group, so SIGKILL reaches npx, tsx and node alike (kill -9 of the whole worker).
      detached: true,
      stdio: ['ignore', 'pipe', 'pipe'],
      env: { ...process.env, DATABASE_URL: t.db.url, NODE_ENV: 'test', DEV_MAIL: '1', FORCE_COLOR: '0' },
    },
  );
  child.stdout?.on('data', (chunk: Buffer) => logs.push(`[${label}] ${chunk.toString()}`));
  child.stderr?.on('data', (chunk: Buffer) => logs.push(`[${label}:err] ${chunk.toString()}`));
  workers.push(child);
  return child;
}

function killGroup(child: ChildProcess, signal: NodeJS.Signals): void {
  if (child.pid === undefined || child.exitCode !== null || child.signalCode !== null) return;
  try {
    process.kill(-child.pid, signal);
  } catch {
    // already gone
  }
}

beforeAll(async () => {
  t = await startTestApp();
  configureRunQueue(t.ctx, { expireInSeconds: EXPIRE_SECONDS, retryDelaySeconds: 0 });
  // 160² rather than the usual 64²: the fit must last long enough (seconds) to be caught running and killed.
  f = await runFixture(t.ctx, smallSky(11, 160));
  owner = await signIn(t.app, f.owner.email);
}, 60_000);

afterAll(async () => {
  for (const child of workers) killGroup(child, 'SIGTERM');
  await new Promise((resolve) => setTimeout(resolve, 500));
  for (const child of workers) killGroup(child, 'SIGKILL');
  await stopRunQueue(t.ctx);
  await t.close();
});

it('completes once after its worker is killed mid-run', async () => {
  const bytesBefore = (await User.query().findById(f.owner.id))!.bytesUsed;
  const first = startWorker('worker 1');
  // The default iteration budget spent in full (no settle stop): a few seconds of fitting, time enough to kill
  // it half-way.
  const settings = { ...fastSettings, maxIterations: 300, settleTolerance: 1e-9 };
  const created = await owner.post(`/api/images/${f.imageId}/runs`, { settings });
  expect(created.status).toBe(202);
  const runId = created.body.id as number;
  const get = (p: string) => owner.get(p);

  const running = await waitForRun(
    get,
    runId,
    (body) => body.status === 'running' && body.progress !== null,
    60_000,
  );
  expect((running.progress as { fraction: number }).fraction).toBeLessThan(1);
  killGroup(first, 'SIGKILL');
  await new Promise<void>((resolve) =>
    first.exitCode !== null || first.signalCode !== null ? resolve() : first.once('exit', () => resolve()),
  );
  const afterKill = (await get(`/api/runs/${runId}`)).body;
  expect(afterKill, logs.join('')).toMatchObject({ status: 'running', attempts: 1 });

  startWorker('worker 2');
  const done = await waitForRun(
    get,
    runId,
    (body) => !['queued', 'running'].includes(body.status),
    120_000,
  ).catch((error: Error) => {
    throw new Error(`${error.message}\n${logs.join('')}`);
  });
  expect(done.status, logs.join('')).toBe('succeeded');
  // Picked up again only after the job's expiry, counted from the first attempt's start (both times are the
  // database's now()).
  const firstStart = Date.parse((running.timings as { startedAt: string }).startedAt);
  const secondStart = Date.parse((done.timings as { startedAt: string }).startedAt);
  expect(secondStart - firstStart).toBeGreaterThanOrEqual((EXPIRE_SECONDS - 1) * 1000);
  expect(done.attempts).toBe(2);

  const sourceCount = done.sourceCount as number;
  expect(sourceCount).toBeGreaterThan(0);
  const rows = (await t.ctx.knex('run_sources').where('runId', runId).select('sourceId')) as {
    sourceId: number;
  }[];
  expect(rows).toHaveLength(sourceCount);
  expect(new Set(rows.map((r) => r.sourceId)).size).toBe(sourceCount);
  const planes = (await t.ctx.knex('run_components').where('runId', runId).select('name')) as {
    name: string;
  }[];
  expect(planes.map((p) => p.name).sort()).toEqual(
    ['compact', 'compactSky', 'diffuse', 'diffuseSky', 'model', 'residual', 'residualNorm'].sort(),
  );
  const bytesAfter = (await User.query().findById(f.owner.id))!.bytesUsed;
  expect(bytesAfter - bytesBefore).toBe(done.resultBytes);

  // pg-boss saw one failure by expiry and one completion of the same job.
  const job = (
    await t.ctx.knex.raw('select state, retry_count from pgboss.job where data->>? = ?', [
      'runId',
      String(runId),
    ])
  ).rows as { state: string; retry_count: number }[];
  expect(job).toEqual([{ state: 'completed', retry_count: 1 }]);
}, 180_000);
