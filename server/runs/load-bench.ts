/**
 * Load bench for the result routes (issue 5): a throwaway PostgreSQL, the app listening on loopback, one finished
 * run on a simulated image (the invented Lyra Deep Field scenario), then autocannon with N concurrent clients
 * against a catalogue page and a component view. Prints p50/p95/max latency, requests per second and errors per
 * route (medians of nothing: one timed window per route; machines are noisy, compare numbers from one run).
 *
 *   npx tsx server/runs/load-bench.ts [--connections 50] [--seconds 10] [--size 256]
 */
import { createRequire } from 'node:module';
import { parseArgs } from 'node:util';

import { simulateSky } from '../../samples/sky-simulator';
import { hashPassword } from '../auth/secrets';
import { loadConfig } from '../config';
import { createKnex, migrateLatest } from '../db/knex';
import { createThrowawayCluster } from '../db/throwaway-cluster';
import { writeFits } from '../engine/io/write-fits';
import { User } from '../models/user';
import { stopRunQueue } from '../queue/run-queue';
import { startRunWorker } from '../queue/run-worker';
import { listen, startRuntime } from '../runtime';
import { createToken } from '../tokens/tokens.service';

interface AutocannonResult {
  requests: { average: number };
  errors: number;
  non2xx: number;
  timeouts: number;
}
interface AutocannonInstance extends PromiseLike<AutocannonResult> {
  on(event: 'response', listener: (client: unknown, status: number, bytes: number, ms: number) => void): void;
}
type Autocannon = (options: {
  url: string;
  connections: number;
  duration: number;
  headers: Record<string, string>;
}) => AutocannonInstance;
const autocannon = createRequire(import.meta.url)('autocannon') as Autocannon;

const silent = { info: () => undefined, error: (error: unknown) => console.error(error) };

function percentile(sorted: number[], p: number): number {
  if (sorted.length === 0) return NaN;
  return sorted[Math.min(sorted.length - 1, Math.ceil((p / 100) * sorted.length) - 1)]!;
}

async function main(): Promise<void> {
  const { values } = parseArgs({
    options: {
      connections: { type: 'string', default: '50' },
      seconds: { type: 'string', default: '10' },
      size: { type: 'string', default: '256' },
    },
  });
  const connections = Number(values.connections);
  const seconds = Number(values.seconds);
  const size = Number(values.size);

  const cluster = await createThrowawayCluster('skysieve-bench-pg-');
  const cleanups: (() => Promise<void>)[] = [() => cluster.destroy()];
  try {
    const admin = createKnex(cluster.url('postgres'), { min: 0, max: 1 });
    await admin.raw('create database skysieve_bench');
    await admin.destroy();
    const databaseUrl = cluster.url('skysieve_bench');
    const migrator = createKnex(databaseUrl, { min: 0, max: 1 });
    await migrateLatest(migrator);
    await migrator.destroy();

    const config = {
      ...loadConfig({ NODE_ENV: 'test', DEV_MAIL: '1', BCRYPT_ROUNDS: '4' }),
      databaseUrl,
      port: 0,
      host: '127.0.0.1',
      // The bench measures the API, not the rate limits.
      signInRateLimit: 1_000_000,
    };
    const runtime = await startRuntime(config, {
      sessionSecret: 'bench-session-secret-0123456789',
      logger: silent,
    });
    cleanups.unshift(() => runtime.close());
    const server = await listen(runtime, { clientDirectory: '/nonexistent' });
    cleanups.unshift(() => server.close());
    cleanups.unshift(() => stopRunQueue(runtime.ctx));
    const worker = await startRunWorker(runtime.ctx, { concurrency: 1, pollingIntervalSeconds: 0.5 });
    cleanups.unshift(() => worker.stop());

    const user = await User.query().insertAndFetch({
      email: 'bench@aws-survey.invalid',
      displayName: 'Bench',
      passwordHash: await hashPassword('bench-password-123', 4),
      role: 'member',
      disabled: false,
      quotaBytes: 10 * 1024 ** 3,
      bytesUsed: 0,
    });
    const token = (await createToken(user, 'bench', null)).token;
    const headers = { authorization: `Bearer ${token}` };
    const api = async (path: string, init: RequestInit = {}) => {
      const response = await fetch(`${server.url}${path}`, {
        ...init,
        headers: { ...headers, ...(init.headers ?? {}) },
      });
      const body = (await response.json()) as Record<string, unknown>;
      if (!response.ok) throw new Error(`${path}: ${response.status} ${JSON.stringify(body)}`);
      return body;
    };
    const project = await api('/api/projects', {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ name: 'Lyra Deep Field bench' }),
    });
    const sky = simulateSky({
      width: size,
      height: size,
      seed: 5,
      psf: { fwhmMajorPx: 3, fwhmMinorPx: 3, paDeg: 0 },
      diffuse: { level: 2e-4, logStd: 0.4, slope: 3.5 },
      sources: { count: Math.round((size * size) / 800), minFlux: 3e-3, maxFlux: 3e-2, minSeparationPx: 6 },
      noise: { kind: 'gaussian', sigma: 1e-4 },
      wcs: { projection: 'SIN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
      unit: 'Jy/beam',
      writeBeam: true,
    });
    const form = new FormData();
    const fits = writeFits({ width: sky.width, height: sky.height, data: sky.image }, { header: sky.header });
    form.append('file', new Blob([fits]), 'lyra-bench.fits');
    const image = await api(`/api/projects/${String(project.id)}/images`, { method: 'POST', body: form });
    const run = await api(`/api/images/${String(image.id)}/runs`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ settings: { psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 }, noiseSigma: 1e-4 } }),
    });
    const fitStarted = performance.now();
    let detail: Record<string, unknown>;
    for (;;) {
      detail = await api(`/api/runs/${String(run.id)}`);
      if (!['queued', 'running'].includes(String(detail.status))) break;
      await new Promise((resolve) => setTimeout(resolve, 500));
    }
    if (detail.status !== 'succeeded')
      throw new Error(`The bench run ${String(detail.status)}: ${String(detail.errorMessage)}`);
    console.log(
      `Run on a ${size}×${size} image: ${String(detail.sourceCount)} sources, ${((performance.now() - fitStarted) / 1000).toFixed(1)} s from queued to succeeded.`,
    );

    const targets = [
      // Baseline: token authentication and one small query, to tell the cost of the run routes from the rest.
      { name: 'baseline: GET /api/projects', path: '/api/projects' },
      {
        name: 'catalogue page (100 rows, -snr)',
        path: `/api/runs/${String(run.id)}/sources?page=1&pageSize=100&sort=-snr`,
      },
      {
        name: 'catalogue page (minSnr=10, flux)',
        path: `/api/runs/${String(run.id)}/sources?minSnr=10&sort=flux&pageSize=50`,
      },
      {
        name: 'component view (model, maxSize 256)',
        path: `/api/runs/${String(run.id)}/components/model?maxSize=256`,
      },
      {
        name: 'component view (residual, maxSize 64)',
        path: `/api/runs/${String(run.id)}/components/residual?maxSize=64`,
      },
    ];
    console.log(
      `\n${connections} connections, ${seconds} s per route, loopback, 2-core machine shared with other work\n`,
    );
    console.log(
      'route'.padEnd(40),
      'req/s'.padStart(8),
      'p50 ms'.padStart(8),
      'p95 ms'.padStart(8),
      'max ms'.padStart(8),
      'errors'.padStart(7),
    );
    for (const target of targets) {
      const latencies: number[] = [];
      const instance = autocannon({
        url: `${server.url}${target.path}`,
        connections,
        duration: seconds,
        headers,
      });
      instance.on('response', (_client, _status, _bytes, ms) => latencies.push(ms));
      const result = await instance;
      latencies.sort((a, b) => a - b);
      const errors = result.errors + result.non2xx + result.timeouts;
      console.log(
        target.name.padEnd(40),
        result.requests.average.toFixed(0).padStart(8),
        percentile(latencies, 50).toFixed(1).padStart(8),
        percentile(latencies, 95).toFixed(1).padStart(8),
        (latencies.at(-1) ?? NaN).toFixed(1).padStart(8),
        String(errors).padStart(7),
      );
    }
  } finally {
    // Let requests still queued behind the pool finish before the pools close.
    await new Promise((resolve) => setTimeout(resolve, 2000));
    for (const cleanup of cleanups) await cleanup().catch((error: unknown) => console.error(error));
  }
}

main().then(
  () => process.exit(0),
  (error: unknown) => {
    console.error(error instanceof Error ? error.message : error);
    process.exit(1);
  },
);
