// @vitest-environment node
/**
 * GET /api/runs/:id/quicklook.png: the picture decodes (jimp, and an independent reader written with Python's
 * standard library after the PNG standard), has the size asked for, shows beam-sized ring markers at the
 * catalogue positions with the right orientation, brightness follows the asinh stretch between percentile
 * limits, bad parameters get clear 4xx answers, and the route follows the project's read rules.
 * No worker runs: the finished runs are written straight into the tables.
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

import { Jimp } from 'jimp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { QUICKLOOK_COLOUR_MAPS } from '../../../shared/quicklook';
import { float32ToBytes } from '../../../server/models/run-component';
import { MARKER_RGB } from '../../../server/runs/quicklook-image';
import {
  COLOUR_MAP_NAMES,
  colourMapTable,
  DIVERGING_COLOUR_MAP_NAMES,
} from '../../../src/viewer/colour-maps';
import { type Actor, actors, readStatuses, signInActors } from '../../support/authorization-actors';
import { BrowserClient, startTestApp, type TestApp } from '../../support/test-app';
import { insertRunRow, type RunFixture, runFixture, sourceRow } from './run-support';

type Caller = Pick<BrowserClient, 'get'>;

let t: TestApp;
let f: RunFixture;
let owner: BrowserClient;
let runId = 0;
const folder = mkdtempSync(join(tmpdir(), 'skysieve-quicklook-'));
let callers: Map<Actor, Caller>;

/** 64 × 64 model plane: a ramp, the value of a pixel is its 0-based column. */
const RAMP_SIZE = 64;
const ramp = Float32Array.from({ length: RAMP_SIZE * RAMP_SIZE }, (_, i) => i % RAMP_SIZE);
/** The one catalogue source (FITS 1-based pixels) and the PSF of the run's settings (pixels, PA degrees). */
const SOURCE = { x: 20, y: 30 };
const PSF = { fwhmMajor: 6, fwhmMinor: 4, pa: 0 };

async function insertRun(status: 'succeeded' | 'queued'): Promise<number> {
  const run = await insertRunRow(f, {
    status,
    settings: { psf: PSF },
    settingsDigest: 'a'.repeat(64),
    sourceCount: status === 'succeeded' ? 1 : null,
  });
  if (status === 'queued') return run.id;
  await t.ctx.knex('run_sources').insert(sourceRow(run.id, 1, SOURCE));
  const model = float32ToBytes(ramp);
  const signed = float32ToBytes(ramp.map((x) => (x - 32) / 32));
  const blank = float32ToBytes(new Float32Array(16).fill(NaN));
  const wide = float32ToBytes(Float32Array.from({ length: 200 * 150 }, (_, i) => Math.sin(i / 7)));
  await t.ctx.knex('run_components').insert([
    { runId: run.id, name: 'model', width: 64, height: 64, data: model, byteSize: model.byteLength },
    { runId: run.id, name: 'residualNorm', width: 64, height: 64, data: signed, byteSize: signed.byteLength },
    { runId: run.id, name: 'residual', width: 200, height: 150, data: wide, byteSize: wide.byteLength },
    { runId: run.id, name: 'compactSky', width: 4, height: 4, data: blank, byteSize: blank.byteLength },
  ]);
  return run.id;
}

beforeAll(async () => {
  t = await startTestApp();
  f = await runFixture(t.ctx);
  ({ callers, owner } = await signInActors(t, f, 'quicklook'));
  runId = await insertRun('succeeded');
}, 60_000);

afterAll(async () => {
  await t.close();
  rmSync(folder, { recursive: true, force: true });
});

async function fetchPng(query: string): Promise<Buffer> {
  const response = await owner
    .get(`/api/runs/${runId}/quicklook.png?${query}`)
    .buffer(true)
    .parse((res, done) => {
      const parts: Buffer[] = [];
      res.on('data', (part: Buffer) => parts.push(part));
      res.on('end', () => done(null, Buffer.concat(parts)));
    });
  expect(response.status, String(response.body)).toBe(200);
  expect(response.headers['content-type']).toBe('image/png');
  return response.body as Buffer;
}

/** Pixels (column, row from the top) read by the standard-library reader (tests/server/runs/decode-png.py). */
function decodeWithPython(png: Buffer, points: [number, number][]) {
  const path = join(folder, `picture-${Math.random().toString(36).slice(2)}.png`);
  writeFileSync(path, png);
  const output = execFileSync('/usr/bin/python3', [
    new URL('./decode-png.py', import.meta.url).pathname,
    path,
    ...points.map(([x, y]) => `${x},${y}`),
  ]);
  return JSON.parse(output.toString()) as { width: number; height: number; pixels: number[][] };
}

const isMarker = (rgba: number[]) =>
  rgba[0] === MARKER_RGB[0] && rgba[1] === MARKER_RGB[1] && rgba[2] === MARKER_RGB[2];

describe('quick-look picture', () => {
  it('draws the model at 4× with a beam-sized ring at the source, major axis along +y (PA 0)', async () => {
    const png = await fetchPng('component=model&maxSize=256');
    const image = await Jimp.read(png);
    // 64 px under half of 256: magnified by the largest whole factor ≤ 4 that fits, 4.
    expect([image.bitmap.width, image.bitmap.height]).toEqual([256, 256]);
    // Centre of FITS pixel (20, 30) on the picture: column (20 − 0.5)·4 − 0.5 = 77.5,
    // row from the top 255 − ((30 − 0.5)·4 − 0.5) = 137.5. Semi-axes FWHM/2 · 4: 12 px along ±y, 8 px along ±x.
    const at = (column: number, row: number) => {
      const i = 4 * (row * 256 + column);
      return [...image.bitmap.data.subarray(i, i + 4)];
    };
    const onRing: [number, number][] = [
      [77, 126], // 11.5 px above the centre: the major axis
      [78, 149], // 11.5 px below
      [85, 137], // 7.5 px right: the minor axis
      [70, 138], // 7.5 px left
    ];
    const offRing: [number, number][] = [
      [77, 137], // the centre: a ring, not a disc
      [89, 137], // 11.5 px right: would be on the ring only if the major axis were along x
      [77, 131], // half way to the ring along the major axis
    ];
    for (const [column, row] of onRing) expect(isMarker(at(column, row)), `${column},${row}`).toBe(true);
    for (const [column, row] of offRing) expect(isMarker(at(column, row)), `${column},${row}`).toBe(false);
    // Just outside the ring (1.5 px beyond it, at 13.5 px along the major axis) the sky is darkened to 45 %, a
    // halo that keeps the ring visible; the ramp's value depends only on the column, so row 20 shows the same sky.
    const sky = at(77, 20);
    const halo = at(77, 124);
    for (let k = 0; k < 3; k++)
      expect(Math.abs(halo[k]! - sky[k]! * 0.45), `channel ${k}`).toBeLessThanOrEqual(0.5);
    // The marker colour is not a colour of the map, so marker pixels cannot be sky pixels.
    const table = colourMapTable('ember');
    for (let k = 0; k < 256; k++) {
      expect(isMarker([table[3 * k]!, table[3 * k + 1]!, table[3 * k + 2]!])).toBe(false);
    }

    // The same pixels through the independent reader.
    const decoded = decodeWithPython(png, [...onRing, ...offRing]);
    expect([decoded.width, decoded.height]).toEqual([256, 256]);
    expect(decoded.pixels.map(isMarker)).toEqual([...onRing.map(() => true), ...offRing.map(() => false)]);
    expect(decoded.pixels).toEqual([...onRing, ...offRing].map(([c, r]) => at(c, r)));
  });

  it('maps values through the asinh stretch between the 0.25 and 99.75 percentiles', async () => {
    const image = await Jimp.read(await fetchPng('component=model&maxSize=256&colourMap=grey'));
    // Percentiles as numpy's default (linear between order statistics at rank (n − 1) q), computed here from
    // the magnified plane: every column value repeated 4 × 256 times.
    const values = Float64Array.from({ length: 256 * 256 }, (_, i) => Math.floor((i % 256) / 4)).sort();
    const quantile = (q: number) => {
      const h = (values.length - 1) * q;
      const lo = Math.floor(h);
      return values[lo]! + (h - lo) * (values[Math.min(lo + 1, values.length - 1)]! - values[lo]!);
    };
    const lower = quantile(0.0025);
    const upper = quantile(0.9975);
    const table = colourMapTable('grey');
    // Far from the source (rows 0–40 are 90+ px above it).
    for (const value of [0, 3, 10, 32, 63]) {
      const column = value * 4 + 1;
      const t = Math.min(1, Math.max(0, (value - lower) / (upper - lower)));
      // Lupton, Gunn & Szalay (1999), AJ 118, 1406: brightness asinh(t/β)/asinh(1/β), β = 0.1.
      const s = Math.asinh(t / 0.1) / Math.asinh(1 / 0.1);
      const expected = Math.round(s * 255);
      const i = 4 * (20 * 256 + column);
      const red = image.bitmap.data[i]!;
      // The painter tabulates the curve at 65 536 levels: at most one colour-map step away.
      const nearest = [expected - 1, expected, expected + 1].filter((k) => k >= 0 && k <= 255);
      expect(
        nearest.some((k) => table[3 * k] === red),
        `value ${value}: red ${red}, expected entry ${expected}`,
      ).toBe(true);
      expect(image.bitmap.data[i + 3]).toBe(255);
    }
  });

  it('draws a signed plane linearly between limits symmetric about zero, in the diverging map', async () => {
    const image = await Jimp.read(await fetchPng('component=residualNorm&maxSize=256'));
    // Values (x − 32)/32 for columns x = 0 … 63: −1 … 0.96875, each column 1024 times on the 4× picture. The
    // 0.25 / 99.75 percentiles (ranks 163 and 65 371 of 65 536) are −1 and 0.96875, so the limits become ±1:
    // zero (column 32) sits in the middle of the map (entry 127.5), 0.96875 at (0.96875 + 1)/2 · 255 ≈ 251.
    const table = colourMapTable('seesaw');
    const pixel = (column: number) => [
      ...image.bitmap.data.subarray(4 * (20 * 256 + column), 4 * (20 * 256 + column) + 3),
    ];
    const entry = (k: number) => [table[3 * k]!, table[3 * k + 1]!, table[3 * k + 2]!];
    expect([entry(127), entry(128)]).toContainEqual(pixel(32 * 4 + 1));
    // The ends: the most negative column at the map's first entry, the most positive at entry 251 (± 1 for the
    // painter's tabulated curve).
    expect(pixel(1)).toEqual(entry(0));
    expect([entry(250), entry(251), entry(252)]).toContainEqual(pixel(63 * 4 + 1));
    // A map asked for by name still wins.
    const ember = await Jimp.read(await fetchPng('component=residualNorm&maxSize=256&colourMap=ember'));
    const first = colourMapTable('ember');
    expect([...ember.bitmap.data.subarray(4 * (20 * 256 + 1), 4 * (20 * 256 + 1) + 3)]).toEqual([
      first[0],
      first[1],
      first[2],
    ]);
  });

  it('block-averages a large plane so that its longer side fits maxSize', async () => {
    const png = await fetchPng('component=residual&maxSize=64');
    // 200 × 150 with maxSize 64: factor ⌈200/64⌉ = 4, so ⌈200/4⌉ × ⌈150/4⌉ = 50 × 38.
    const decoded = decodeWithPython(png, [[0, 0]]);
    expect([decoded.width, decoded.height]).toEqual([50, 38]);
    const image = await Jimp.read(png);
    expect([image.bitmap.width, image.bitmap.height]).toEqual([50, 38]);
  });

  it('draws the input data with its own size when maxSize leaves no room to magnify', async () => {
    const png = await fetchPng('component=data&maxSize=100');
    const image = await Jimp.read(png);
    expect([image.bitmap.width, image.bitmap.height]).toEqual([f.sky.width, f.sky.height]);
  });

  it('answers a repeated request from its ETag with 304, and the same bytes again without it', async () => {
    const first = await fetchPng('component=model&maxSize=128');
    const response = await owner.get(`/api/runs/${runId}/quicklook.png?component=model&maxSize=128`);
    const etag = response.headers.etag as string;
    expect(etag).toMatch(/^"quicklook-\d+-a{16}-model-128-default"$/);
    const again = await owner
      .get(`/api/runs/${runId}/quicklook.png?component=model&maxSize=128`)
      .set('if-none-match', etag);
    expect(again.status).toBe(304);
    // Another size is another picture.
    const other = await owner
      .get(`/api/runs/${runId}/quicklook.png?component=model&maxSize=64`)
      .set('if-none-match', etag);
    expect(other.status).toBe(200);
    expect(Buffer.compare(await fetchPng('component=model&maxSize=128'), first)).toBe(0);
  });

  it('offers exactly the colour maps of the viewer', () => {
    expect([...QUICKLOOK_COLOUR_MAPS]).toEqual([...COLOUR_MAP_NAMES, ...DIVERGING_COLOUR_MAP_NAMES]);
  });

  it('answers bad parameters, missing planes and unfinished runs with a clear message', async () => {
    const plane = await owner.get(`/api/runs/${runId}/quicklook.png?component=sky`);
    expect(plane.status).toBe(400);
    expect(plane.body.error.message).toContain('Choose the plane to show: data or one of diffuse');
    const small = await owner.get(`/api/runs/${runId}/quicklook.png?maxSize=10`);
    expect(small.status).toBe(400);
    expect(small.body.error.message).toContain('maxSize must be at least 64 pixels.');
    const missing = await owner.get(`/api/runs/${runId}/quicklook.png?component=compact`);
    expect(missing.status).toBe(404);
    expect(missing.body.error.message).toBe(`Run ${runId} has no compact component.`);
    const empty = await owner.get(`/api/runs/${runId}/quicklook.png?component=compactSky`);
    expect(empty.status).toBe(422);
    expect(empty.body.error.message).toBe(
      `The compactSky plane of run ${runId} has no valid pixels, so there is nothing to draw.`,
    );
    const queued = await insertRun('queued');
    const early = await owner.get(`/api/runs/${queued}/quicklook.png`);
    expect(early.status).toBe(409);
    expect(early.body.error.message).toBe(
      `Run ${queued} is queued; a quick-look picture needs a run that has succeeded.`,
    );
  });
});

describe('quick-look authorization', () => {
  it.each(actors)('as %s', async (actor) => {
    const response = await callers
      .get(actor)!
      .get(`/api/runs/${runId}/quicklook.png?component=model&maxSize=64`);
    const expected = readStatuses[actor];
    expect(response.status, `${actor}: ${JSON.stringify(response.body)}`).toBe(expected);
    if (expected === 200) expect(response.headers['content-type']).toBe('image/png');
    if (expected === 404) expect(response.body.error.message).toBe('Run not found.');
    if (expected === 401) expect(response.body.error.message).toBe('Sign in to continue.');
  });
});
