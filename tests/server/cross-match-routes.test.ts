// @vitest-environment node
/**
 * Reference catalogues and cross-matching through the API: preview, upload (quota of the project owner charged
 * exactly and given back on delete or with the project), refusals of bad files with nothing stored, the
 * authorization matrix, a small match checked by hand and by astropy, pixel matching for an image without a
 * celestial WCS, and the matched table exported as CSV, VOTable and FITS and read back by astropy.
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

import { parse as parseCsv } from 'csv-parse/sync';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import type { CrossMatchResultDto } from '../../shared/cross-match';
import { parseWcs } from '../../server/engine/wcs/wcs';
import { Project } from '../../server/models/project';
import { Run } from '../../server/models/run';
import { User } from '../../server/models/user';
import { stopRunQueue } from '../../server/queue/run-queue';
import { createToken } from '../../server/tokens/tokens.service';
import { readBackWithAstropy } from '../catalogue/astropy-read-back';
import { type Actor, actors, editorsStatuses, readStatuses } from '../support/authorization-actors';
import {
  BrowserClient,
  createUser,
  signIn,
  startTestApp,
  type TestApp,
  TokenClient,
} from '../support/test-app';
import { type RunFixture, runFixture, storeImage, smallSky } from './runs/run-support';

type Caller = BrowserClient | TokenClient;

let t: TestApp;
let f: RunFixture;
let owner: BrowserClient;
let editor: BrowserClient;
let viewer: BrowserClient;
const callers = new Map<Actor, Caller>();
const dir = mkdtempSync(join(tmpdir(), 'skysieve-cross-match-'));

beforeAll(async () => {
  t = await startTestApp();
  f = await runFixture(t.ctx);
  owner = await signIn(t.app, f.owner.email);
  editor = await signIn(t.app, f.editor.email);
  viewer = await signIn(t.app, f.viewer.email);
  const admin = await createUser(t.ctx, { role: 'admin' });
  const outsider = await createUser(t.ctx);
  callers.set('admin', await signIn(t.app, admin.email));
  callers.set('owner', owner);
  callers.set('editor', editor);
  callers.set('viewer', viewer);
  callers.set('non-member', await signIn(t.app, outsider.email));
  callers.set('signed-out', new BrowserClient(t.app));
  callers.set('owner token', new TokenClient(t.app, (await createToken(f.owner, 'xmatch', null)).token));
}, 60_000);

afterAll(async () => {
  await stopRunQueue(t.ctx);
  await t.close();
  rmSync(dir, { recursive: true, force: true });
});

// ---- helpers ----

/** POST of a file as multipart (field "file") with optional text fields, by a session or a token. */
async function sendFile(
  caller: Caller,
  path: string,
  bytes: Buffer,
  fileName: string,
  fields: Record<string, string> = {},
) {
  // The token first: fetching it may refresh the session cookie the request must then carry.
  const token = caller instanceof BrowserClient ? await caller.csrfToken() : null;
  const test =
    caller instanceof BrowserClient
      ? caller.agent.post(path).set('x-csrf-token', token!)
      : request(caller.app).post(path).set('authorization', `Bearer ${caller.token}`);
  for (const [key, value] of Object.entries(fields)) test.field(key, value);
  return test.attach('file', bytes, fileName);
}

const upload = (caller: Caller, projectId: number, text: string, name = 'ref.csv', fields = {}) =>
  sendFile(caller, `/api/projects/${projectId}/reference-catalogues`, Buffer.from(text), name, fields);
const preview = (caller: Caller, projectId: number, text: string, name = 'ref.csv', fields = {}) =>
  sendFile(
    caller,
    `/api/projects/${projectId}/reference-catalogues/preview`,
    Buffer.from(text),
    name,
    fields,
  );

const bytesUsed = async (id: number) => (await User.query().findById(id))!.bytesUsed;
const catalogueCount = async () =>
  Number((await t.ctx.knex('reference_catalogues').count({ n: '*' }))[0]!.n) +
  Number((await t.ctx.knex('reference_catalogue_contents').count({ n: '*' }))[0]!.n);

interface SourceSpec {
  ra: number | null;
  dec: number | null;
  x?: number;
  y?: number;
  flux: number;
  fluxDensity?: number | null;
}

/** A finished run written straight into the tables, with sources at the given positions. */
async function insertRun(
  imageId: number,
  projectId: number,
  sources: SourceSpec[],
  psfPx = 3,
): Promise<number> {
  const image = (await t.ctx.knex('images').where('id', imageId).first('header')) as {
    header: Parameters<typeof parseWcs>[0];
  };
  const wcs = parseWcs(image.header);
  const run = await Run.query().insertAndFetch({
    imageId,
    projectId,
    createdBy: f.owner.id,
    status: 'succeeded',
    requestedSettings: {},
    settings: {},
    settingsDigest: 'a'.repeat(64),
    attempts: 1,
    cancelRequested: false,
    resultBytes: 0,
    sourceCount: sources.length,
    finishedAt: new Date(),
  });
  await t.ctx
    .knex('runs')
    .where('id', run.id)
    .update({ diagnostics: JSON.stringify({ psfFwhmPx: { major: psfPx, minor: psfPx } }) });
  if (sources.length > 0) {
    await t.ctx.knex('run_sources').insert(
      sources.map((s, i) => {
        const [x, y] = s.x !== undefined ? [s.x, s.y!] : wcs!.worldToPixel(s.ra!, s.dec!);
        return {
          runId: run.id,
          sourceId: i + 1,
          x,
          y,
          xErr: 0.1,
          yErr: 0.1,
          ra: s.ra,
          dec: s.dec,
          raErrArcsec: s.ra === null ? null : 0.15,
          decErrArcsec: s.dec === null ? null : 0.15,
          flux: s.flux,
          fluxErr: s.flux / 20,
          fluxDensity: s.fluxDensity === undefined ? s.flux : s.fluxDensity,
          fluxDensityErr: null,
          snr: 20,
          significance: null,
          flags: [],
        };
      }),
    );
  }
  return run.id;
}

// ---- the hand-checked case ----
// The fixture image: SIN projection at RA 283.75°, Dec 38.6°, 1.5″ pixels, 64 × 64, Jy/beam, beam 4.5″ × 4.5″
// (3 px), so the default radius is √(4.5 · 4.5)/2 = 2.25″.
const D = 38.6;
const arcsec = 1 / 3600;
const ours: SourceSpec[] = [
  { ra: 283.75, dec: D, flux: 0.01 },
  { ra: 283.752, dec: D + 0.001, flux: 0.02 },
  { ra: 283.74, dec: D - 0.005, flux: 0.005 },
];
// A: 1″ north of our 1 · B: 1.5″ (on the sky) west of our 2, same Dec · C: far from all · E: 3″ south of our 1.
const raB = 283.752 + (1.5 * arcsec) / Math.cos(((D + 0.001) * Math.PI) / 180);
const referenceCsv = [
  '# Aster Wide Survey, Lyra Deep Field, band 2 (invented demo data)',
  'name,RAJ2000,DEJ2000,S_int',
  `AWS-A,283.75,${D + arcsec},0.011`,
  `AWS-B,${raB},${D + 0.001},0.018`,
  `AWS-C,283.76,${D + 0.01},0.03`,
  `AWS-E,283.75,${D - 3 * arcsec},0.004`,
  'AWS-bad,not-an-angle,38.6,0.1',
].join('\n');

describe('preview', () => {
  it('answers the columns, the guessed mapping, first rows and rejected rows, and stores nothing', async () => {
    const before = await catalogueCount();
    const response = await preview(editor, f.project.id, referenceCsv, 'aws-band2.csv');
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    expect(response.body).toMatchObject({
      fileName: 'aws-band2.csv',
      format: 'csv',
      guessedMapping: { ra: 'RAJ2000', dec: 'DEJ2000', flux: 'S_int', id: 'name' },
      mapping: { ra: 'RAJ2000', dec: 'DEJ2000', flux: 'S_int', id: 'name' },
      positions: 'sky',
      problem: null,
      rowsRead: 5,
      rowsRejected: 1,
      rejected: [{ row: 5, line: 7, reason: expect.stringMatching(/not-an-angle/) }],
    });
    expect(response.body.columns.map((c: { name: string }) => c.name)).toEqual([
      'name',
      'RAJ2000',
      'DEJ2000',
      'S_int',
    ]);
    expect(response.body.sampleRows[0]).toEqual(['AWS-A', '283.75', String(D + arcsec), '0.011']);
    expect(response.body.sampleEntries).toHaveLength(4);
    // Names only (CSV has no UCDs): a person should check.
    expect(response.body.unsure).toBe(true);
    expect(response.body.notes.join(' ')).toMatch(/recognised by column name only/);
    expect(await catalogueCount()).toBe(before);
  });

  it('reports a file without position columns as a problem with its columns, so they can be chosen', async () => {
    const text = 'label,alpha_deg,delta_deg,peak\nq1,283.75,38.6,0.01\n';
    const response = await preview(editor, f.project.id, text);
    expect(response.status).toBe(200);
    expect(response.body.problem).toMatch(/^No position columns found/);
    expect(response.body.mapping).toBeNull();
    expect(response.body.columns.map((c: { name: string }) => c.name)).toEqual([
      'label',
      'alpha_deg',
      'delta_deg',
      'peak',
    ]);
    const chosen = await preview(editor, f.project.id, text, 'q.csv', {
      mapping: JSON.stringify({ ra: 'alpha_deg', dec: 'delta_deg', flux: 'peak', id: 'label' }),
    });
    expect(chosen.body).toMatchObject({ problem: null, positions: 'sky', unsure: false, rowsRejected: 0 });
    expect(chosen.body.sampleEntries[0]).toMatchObject({ id: 'q1', ra: 283.75, dec: 38.6, flux: 0.01 });
  });

  it('takes the file as a raw text/csv body with options in the query string', async () => {
    const token = await editor.csrfToken();
    const response = await editor.agent
      .post(`/api/projects/${f.project.id}/reference-catalogues/preview?fileName=raw.csv`)
      .set('x-csrf-token', token)
      .set('content-type', 'text/csv')
      .send(referenceCsv);
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    expect(response.body).toMatchObject({ fileName: 'raw.csv', rowsRead: 5, rowsRejected: 1 });
  });

  it('reads a VOTable with UCDs as sure', async () => {
    const vot = `<?xml version="1.0"?>
<VOTABLE version="1.4" xmlns="http://www.ivoa.net/xml/VOTable/v1.3"><RESOURCE><TABLE>
<FIELD name="id" datatype="char" arraysize="*" ucd="meta.id;meta.main"/>
<FIELD name="ra" datatype="double" unit="deg" ucd="pos.eq.ra;meta.main"/>
<FIELD name="dec" datatype="double" unit="deg" ucd="pos.eq.dec;meta.main"/>
<FIELD name="s" datatype="double" unit="Jy" ucd="phot.flux.density;meta.main"/>
<DATA><TABLEDATA><TR><TD>v1</TD><TD>283.75</TD><TD>38.6</TD><TD>0.01</TD></TR></TABLEDATA></DATA>
</TABLE></RESOURCE></VOTABLE>`;
    const response = await preview(editor, f.project.id, vot, 'ref.vot');
    expect(response.body).toMatchObject({ format: 'votable', unsure: false, problem: null, rowsRead: 1 });
    expect(response.body.columns[1]).toEqual({ name: 'ra', unit: 'deg', ucd: 'pos.eq.ra;meta.main' });
  });
});

describe('upload, list, read, delete and the quota', () => {
  it("charges the project owner's quota exactly and gives it back on delete", async () => {
    const ownerBefore = await bytesUsed(f.owner.id);
    const editorBefore = await bytesUsed(f.editor.id);
    const response = await upload(editor, f.project.id, referenceCsv, 'aws-band2.csv', {
      name: 'AWS band 2',
    });
    expect(response.status, JSON.stringify(response.body)).toBe(201);
    const body = response.body;
    expect(response.headers.location).toBe(`/api/projects/${f.project.id}/reference-catalogues/${body.id}`);
    expect(body).toMatchObject({
      name: 'AWS band 2',
      originalFileName: 'aws-band2.csv',
      format: 'csv',
      positions: 'sky',
      rowsRead: 5,
      rowsRejected: 1,
      entryCount: 4,
      uploadedBy: { id: f.editor.id },
      mapping: { ra: 'RAJ2000', dec: 'DEJ2000', flux: 'S_int', id: 'name' },
    });
    expect(body.rejected).toHaveLength(1);
    expect(body.sampleEntries.map((e: { id: string }) => e.id)).toEqual(['AWS-A', 'AWS-B', 'AWS-C', 'AWS-E']);
    // Bytes: the file plus the stored entries (more than the file alone), charged to the owner, not the uploader.
    const fileBytes = Buffer.byteLength(referenceCsv);
    expect(body.bytes).toBeGreaterThan(fileBytes);
    const stored = (await t.ctx
      .knex('reference_catalogue_contents')
      .where('referenceCatalogueId', body.id)
      .first(
        t.ctx.knex.raw('octet_length(original) as o'),
        t.ctx.knex.raw('octet_length(entries::text) as e'),
      )) as {
      o: number;
      e: number;
    };
    expect(stored.o).toBe(fileBytes);
    expect(await bytesUsed(f.owner.id)).toBe(ownerBefore + body.bytes);
    expect(await bytesUsed(f.editor.id)).toBe(editorBefore);

    const list = await viewer.get(`/api/projects/${f.project.id}/reference-catalogues`).expect(200);
    expect(list.body.referenceCatalogues.map((c: { id: number }) => c.id)).toContain(body.id);
    const one = await viewer.get(`/api/projects/${f.project.id}/reference-catalogues/${body.id}`).expect(200);
    expect(one.body).toMatchObject({ id: body.id, bytes: body.bytes, rowsRejected: 1 });

    const removed = await editor.delete(`/api/projects/${f.project.id}/reference-catalogues/${body.id}`);
    expect(removed.status).toBe(204);
    expect(await bytesUsed(f.owner.id)).toBe(ownerBefore);
    await viewer.get(`/api/projects/${f.project.id}/reference-catalogues/${body.id}`).expect(404);
    const again = await editor.delete(`/api/projects/${f.project.id}/reference-catalogues/${body.id}`);
    expect(again.status).toBe(404);
    expect(again.body.error.message).toBe('Reference catalogue not found in this project.');
    expect(await bytesUsed(f.owner.id)).toBe(ownerBefore);
  });

  it('gives the bytes back when the project itself is deleted (cascade and trigger)', async () => {
    const g = await runFixture(t.ctx);
    const client = await signIn(t.app, g.owner.email);
    const response = await upload(client, g.project.id, referenceCsv);
    expect(response.status).toBe(201);
    expect(await bytesUsed(g.owner.id)).toBe(response.body.bytes);
    await Project.query().deleteById(g.project.id);
    expect(await bytesUsed(g.owner.id)).toBe(0);
  });

  it("refuses an upload over the owner's quota with 413, storing and charging nothing", async () => {
    const g = await runFixture(t.ctx);
    await t.ctx.knex('users').where('id', g.owner.id).update({ quotaBytes: 1000, bytesUsed: 900 });
    const client = await signIn(t.app, g.editor.email);
    const before = await catalogueCount();
    const response = await upload(client, g.project.id, referenceCsv);
    expect(response.status).toBe(413);
    expect(response.body.error.code).toBe('payload_too_large');
    expect(response.body.error.message).toMatch(/^Not enough storage: /);
    expect(await catalogueCount()).toBe(before);
    expect(await bytesUsed(g.owner.id)).toBe(900);
  });
});

describe('bad files: 4xx with a message, nothing stored, nothing charged', () => {
  const cases: { name: string; bytes: Buffer; fileName: string; status: number; message: RegExp }[] = [
    {
      name: 'no position columns',
      bytes: Buffer.from('label,peak\nq1,0.01\n'),
      fileName: 'q.csv',
      status: 422,
      message: /^No position columns found: .*Columns are: label, peak\. Choose the position columns\.$/,
    },
    {
      name: 'a PNG',
      bytes: Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 0x0d, 0xff, 0xfe]),
      fileName: 'picture.png',
      status: 422,
      message: /^The file (is not UTF-8 text|holds binary data)/,
    },
    {
      name: 'a FITS file',
      bytes: Buffer.from('SIMPLE  =                    T'.padEnd(2880, ' ')),
      fileName: 'table.fits',
      status: 422,
      message: /^This is a FITS file/,
    },
    {
      name: 'a gzip file',
      bytes: Buffer.from([0x1f, 0x8b, 8, 0, 0, 0, 0, 0]),
      fileName: 'ref.csv.gz',
      status: 422,
      message: /gzip-compressed/,
    },
    { name: 'an empty file', bytes: Buffer.alloc(0), fileName: 'empty.csv', status: 422, message: /empty/ },
    {
      name: 'a VOTable in BINARY',
      bytes: Buffer.from(
        '<VOTABLE><RESOURCE><TABLE><FIELD name="ra" datatype="double"/><DATA><BINARY><STREAM encoding="base64">AAAA</STREAM></BINARY></DATA></TABLE></RESOURCE></VOTABLE>',
      ),
      fileName: 'b.vot',
      status: 422,
      message: /only TABLEDATA can be read/,
    },
    {
      name: 'rows that all fail',
      bytes: Buffer.from('ra,dec\nx,y\nq,r\n'),
      fileName: 'bad.csv',
      status: 422,
      message: /^None of the 2 rows could be read/,
    },
    {
      name: 'a mapped column that is not there',
      bytes: Buffer.from('ra,dec\n1,2\n'),
      fileName: 'm.csv',
      status: 422,
      message: /^Column "flux_jy" \(chosen for flux\) is not in the file/,
    },
  ];
  it.each(cases)('$name', async ({ bytes, fileName, status, message, name }) => {
    const before = await catalogueCount();
    const used = await bytesUsed(f.owner.id);
    const fields: Record<string, string> = name.startsWith('a mapped')
      ? { mapping: JSON.stringify({ flux: 'flux_jy' }) }
      : {};
    const response = await sendFile(
      editor,
      `/api/projects/${f.project.id}/reference-catalogues`,
      bytes,
      fileName,
      fields,
    );
    expect(response.status, JSON.stringify(response.body)).toBe(status);
    expect(response.body.error.message).toMatch(message);
    expect(await catalogueCount()).toBe(before);
    expect(await bytesUsed(f.owner.id)).toBe(used);
  });

  it('refuses a mapping that is not JSON, and a request without a file', async () => {
    const bad = await upload(editor, f.project.id, referenceCsv, 'r.csv', { mapping: '{ra:' });
    expect(bad.status).toBe(400);
    expect(bad.body.error.message).toMatch(/^mapping: mapping must be JSON/);
    const none = await editor.post(`/api/projects/${f.project.id}/reference-catalogues`, {});
    expect(none.status).toBe(400);
    expect(none.body.error.message).toMatch(/^Send the catalogue as multipart\/form-data/);
  });

  it('refuses a file above the upload limit with 413 and the limit in the message', async () => {
    const small = await startTestApp({ uploadMaxBytes: 2048 }, t.db);
    try {
      const client = await signIn(small.app, f.editor.email);
      const before = await catalogueCount();
      const big = `ra,dec\n${'283.75,38.6\n'.repeat(400)}`;
      const response = await upload(client, f.project.id, big, 'big.csv');
      expect(response.status).toBe(413);
      expect(response.body.error.message).toMatch(/upload limit (is|of) 2 KiB/);
      const token = await client.csrfToken();
      const raw = await client.agent
        .post(`/api/projects/${f.project.id}/reference-catalogues/preview`)
        .set('x-csrf-token', token)
        .set('content-type', 'text/csv')
        .send(big);
      expect(raw.status).toBe(413);
      expect(await catalogueCount()).toBe(before);
    } finally {
      await small.close();
    }
  });
});

// ---- matching ----

let referenceId = 0;
let runId = 0;

describe('a small cross-match through the API, checked by hand', () => {
  beforeAll(async () => {
    const uploaded = await upload(owner, f.project.id, referenceCsv, 'aws-band2.csv');
    expect(uploaded.status).toBe(201);
    referenceId = uploaded.body.id;
    runId = await insertRun(f.imageId, f.project.id, ours);
  });

  it('pairs our 1 with A and our 2 with B at the default radius of half the beam', async () => {
    const response = await viewer.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'reference', id: referenceId },
    });
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    const body = response.body as CrossMatchResultDto;
    expect(body).toMatchObject({
      mode: 'sky',
      unit: 'arcsec',
      radiusSource: 'beam',
      ourFluxQuantity: 'fluxDensity',
      ourFluxUnit: 'Jy',
      against: { kind: 'reference', id: referenceId, name: 'aws-band2' },
      counts: { ours: 3, theirs: 4, matched: 2, onlyOurs: 1, onlyTheirs: 2 },
    });
    expect(body.radius).toBeCloseTo(2.25, 12);
    expect(body.pairs.map((p) => [p.ourId, p.theirId])).toEqual([
      [1, 'AWS-A'],
      [2, 'AWS-B'],
    ]);
    expect(body.onlyOurs.map((e) => e.id)).toEqual(['3']);
    expect(body.onlyTheirs.map((e) => e.id).sort()).toEqual(['AWS-C', 'AWS-E']);

    // By hand: A differs from our 1 in Dec only, so the great-circle distance is |Δδ| = 1″ and the offsets
    // (ours − theirs) are ΔRA·cosδ = 0, ΔDec = −1″. B differs from our 2 in RA only at δ₂ = 38.601°, with
    // ΔRA = 1.5″/cos δ₂: the haversine formula (Sinnott 1984, Sky & Telescope 68, 159),
    // d = 2 asin √(sin²(Δδ/2) + cos δ₁ cos δ₂ sin²(Δα/2)), gives 2 asin(cos δ₂ sin(Δα/2)) ≈ 1.5″; the RA offset
    // is −ΔRA·cos δ₂ = −1.5″ and the Dec offset 0.
    const rad = Math.PI / 180;
    const d2 = (D + 0.001) * rad;
    const dAlpha = (raB - 283.752) * rad;
    const haversineB = (2 * Math.asin(Math.cos(d2) * Math.sin(dAlpha / 2))) / rad / arcsec;
    const [a, b] = body.pairs as [CrossMatchResultDto['pairs'][0], CrossMatchResultDto['pairs'][0]];
    expect(Math.abs(a.separation - 1)).toBeLessThan(1e-6);
    expect(Math.abs(a.offset1)).toBeLessThan(1e-9);
    expect(Math.abs(a.offset2 + 1)).toBeLessThan(1e-6);
    expect(Math.abs(b.separation - haversineB)).toBeLessThan(1e-9);
    expect(Math.abs(b.separation - 1.5)).toBeLessThan(1e-6);
    expect(Math.abs(b.offset1 + 1.5)).toBeLessThan(1e-6);
    expect(Math.abs(b.offset2)).toBeLessThan(1e-6);

    // Also checked against astropy 5.2: SkyCoord.separation (Vincenty formula) of the same two pairs.
    const script =
      'import json,sys\nfrom astropy.coordinates import SkyCoord\nimport astropy.units as u\n' +
      'p=json.loads(sys.argv[1])\n' +
      'print(json.dumps([SkyCoord(a[0]*u.deg,a[1]*u.deg).separation(SkyCoord(b[0]*u.deg,b[1]*u.deg)).arcsec for a,b in p]))';
    const astropy = JSON.parse(
      execFileSync(
        '/usr/bin/python3',
        [
          '-c',
          script,
          JSON.stringify(
            body.pairs.map((p) => [
              [p.ourRa, p.ourDec],
              [p.theirRa, p.theirDec],
            ]),
          ),
        ],
        { encoding: 'utf8' },
      ),
    ) as number[];
    expect(Math.abs(a.separation - astropy[0]!)).toBeLessThan(1e-7);
    expect(Math.abs(b.separation - astropy[1]!)).toBeLessThan(1e-7);

    // Summary by hand: mean ΔRA = (0 − 1.5)/2 = −0.75″, mean ΔDec = (−1 + 0)/2 = −0.5″; their standard errors
    // s/√n with s the sample standard deviation: s = 1.5/√2 and 1/√2, so 0.75″ and 0.5″. RMS about zero:
    // √(1.5²/2) = 1.0607″, √(1/2) = 0.7071″; RMS separation √((1 + 2.25)/2) = 1.2748″.
    expect(body.offsets.count).toBe(2);
    expect(body.offsets.mean1!).toBeCloseTo(-0.75, 6);
    expect(body.offsets.mean2!).toBeCloseTo(-0.5, 6);
    expect(body.offsets.mean1Err!).toBeCloseTo(0.75, 6);
    expect(body.offsets.mean2Err!).toBeCloseTo(0.5, 6);
    expect(body.offsets.rms1!).toBeCloseTo(Math.sqrt(1.125), 6);
    expect(body.offsets.rms2!).toBeCloseTo(Math.sqrt(0.5), 6);
    expect(body.offsets.rmsSeparation!).toBeCloseTo(Math.sqrt(1.625), 6);
    // Flux ratios (our flux density / theirs): 0.010/0.011 and 0.020/0.018; median = their mean; both lie one
    // MAD from it, so the robust scatter is 1.4826 · |0.020/0.018 − median|.
    const r1 = 0.01 / 0.011;
    const r2 = 0.02 / 0.018;
    const med = (r1 + r2) / 2;
    expect(body.fluxRatio.count).toBe(2);
    expect(body.fluxRatio.median!).toBeCloseTo(med, 12);
    expect(body.fluxRatio.robustScatter!).toBeCloseTo(1.482602218505602 * (r2 - med), 9);
    // Their markers lie on our image: A projects to within a hundredth of a pixel of our 1 shifted 1″/1.5″ up.
    expect(a.theirY! - a.ourY).toBeCloseTo(1 / 1.5, 2);
    expect(body.chanceMatchesExpected).not.toBeNull();
    expect(body.cautions.join(' ')).toMatch(/compared as given/);
  });

  it('a radius given explicitly is used and reported (3.5″ still leaves E apart: our 1 is taken by A)', async () => {
    const response = await viewer.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'reference', id: referenceId },
      radiusArcsec: 3.5,
    });
    expect(response.status).toBe(200);
    expect(response.body).toMatchObject({
      radius: 3.5,
      radiusSource: 'given',
      counts: { matched: 2, onlyTheirs: 2 },
    });
    const tight = await viewer.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'reference', id: referenceId },
      radiusArcsec: 1.2,
    });
    expect(tight.body.pairs.map((p: { theirId: string }) => p.theirId)).toEqual(['AWS-A']);
  });

  it('refuses a bad radius, a reference of another project and a run of another project', async () => {
    const negative = await viewer.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'reference', id: referenceId },
      radiusArcsec: -1,
    });
    expect(negative.status).toBe(400);
    expect(negative.body.error.message).toBe('radiusArcsec: The match radius must be positive.');
    const g = await runFixture(t.ctx, smallSky(12));
    const elsewhere = await upload(await signIn(t.app, g.owner.email), g.project.id, referenceCsv);
    const foreign = await owner.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'reference', id: elsewhere.body.id },
    });
    expect(foreign.status).toBe(404);
    expect(foreign.body.error.message).toBe('Reference catalogue not found in this project.');
    const otherRun = await insertRun(g.imageId, g.project.id, ours);
    const foreignRun = await owner.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'run', id: otherRun },
    });
    expect(foreignRun.status).toBe(404);
    expect(foreignRun.body.error.message).toBe(`Run ${otherRun} not found in this project.`);
    const self = await owner.post(`/api/runs/${runId}/cross-match`, { against: { kind: 'run', id: runId } });
    expect(self.status).toBe(422);
    expect(self.body.error.message).toBe('A run cannot be matched against itself; choose another run.');
  });

  it('refuses a run that has not succeeded with 409', async () => {
    const queued = await Run.query().insertAndFetch({
      imageId: f.imageId,
      projectId: f.project.id,
      createdBy: f.owner.id,
      status: 'queued',
      requestedSettings: {},
      settings: {},
      settingsDigest: 'b'.repeat(64),
      attempts: 0,
      cancelRequested: false,
      resultBytes: 0,
    });
    const response = await owner.post(`/api/runs/${queued.id}/cross-match`, {
      against: { kind: 'reference', id: referenceId },
    });
    expect(response.status).toBe(409);
    expect(response.body.error.message).toBe(
      `This run (run ${queued.id}) is queued; it can be matched once it has succeeded.`,
    );
  });

  it('matches two runs of the same image on the sky', async () => {
    // The other run: our 1 and 2 moved 0.6″ north, our 3 missing, one extra source.
    const moved = await insertRun(f.imageId, f.project.id, [
      { ra: 283.75, dec: D + 0.6 * arcsec, flux: 0.012 },
      { ra: 283.752, dec: D + 0.001 + 0.6 * arcsec, flux: 0.021 },
      { ra: 283.745, dec: D + 0.008, flux: 0.004 },
    ]);
    const response = await viewer.post(`/api/runs/${runId}/cross-match`, {
      against: { kind: 'run', id: moved },
    });
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    expect(response.body).toMatchObject({
      mode: 'sky',
      counts: { matched: 2, onlyOurs: 1, onlyTheirs: 1 },
      against: { kind: 'run', id: moved, name: `Run ${moved}` },
    });
    expect(response.body.offsets.mean2).toBeCloseTo(-0.6, 6);
    expect(response.body.offsets.mean1).toBeCloseTo(0, 6);
  });
});

describe('an image without a celestial WCS: pixel matching', () => {
  let plainImageId = 0;
  let plainRunId = 0;
  beforeAll(async () => {
    plainImageId = await storeImage(t.ctx, f.project.id, f.owner, smallSky(13), 'lyra-plain.fits');
    // No celestial WCS: the header's WCS cards and the summary removed, no beam.
    const image = (await t.ctx.knex('images').where('id', plainImageId).first('header')) as {
      header: { keyword: string }[];
    };
    const header = image.header.filter(
      (card) =>
        !/^(C(TYPE|RVAL|RPIX|DELT|UNIT|D\d_\d)|PC\d_\d|RADESYS|EQUINOX|LONPOLE|LATPOLE|B(MAJ|MIN|PA))/.test(
          card.keyword,
        ),
    );
    await t.ctx
      .knex('images')
      .where('id', plainImageId)
      .update({ header: JSON.stringify(header), wcs: null, beam: null, unit: 'ct' });
    plainRunId = await insertRun(plainImageId, f.project.id, [
      { ra: null, dec: null, x: 10, y: 10, flux: 100, fluxDensity: null },
      { ra: null, dec: null, x: 30, y: 40, flux: 50, fluxDensity: null },
    ]);
  });

  it('refuses a sky-only reference with a clear 422', async () => {
    const response = await viewer.post(`/api/runs/${plainRunId}/cross-match`, {
      against: { kind: 'reference', id: referenceId },
    });
    expect(response.status).toBe(422);
    expect(response.body.error.message).toBe(
      `Run ${plainRunId}'s image has no celestial WCS, so its sources have no RA/Dec, and reference catalogue ` +
        '«aws-band2» gives RA/Dec only (no pixel x/y columns). Match it against a run of an image with a ' +
        'celestial WCS, or upload a catalogue with pixel positions on this image.',
    );
  });

  it('falls back to the pixel x/y of a reference that has both, with the PSF radius', async () => {
    const both = 'id,ra,dec,x,y,flux\nP1,283.75,38.6,10.6,10.8,80\nP2,283.76,38.61,50,50,10\n';
    const uploaded = await upload(owner, f.project.id, both, 'both.csv');
    expect(uploaded.body.positions).toBe('sky');
    const response = await viewer.post(`/api/runs/${plainRunId}/cross-match`, {
      against: { kind: 'reference', id: uploaded.body.id },
    });
    expect(response.status, JSON.stringify(response.body)).toBe(200);
    // PSF 3 px → radius 1.5 px; (10, 10)–(10.6, 10.8) is 1.0 px apart (a 3-4-5 triangle scaled by 0.2).
    expect(response.body).toMatchObject({ mode: 'pixel', unit: 'pixel', radius: 1.5, radiusSource: 'psf' });
    expect(response.body.pairs).toHaveLength(1);
    expect(response.body.pairs[0].separation).toBeCloseTo(1, 12);
    expect(response.body.pairs[0].offset1).toBeCloseTo(-0.6, 12);
    expect(response.body.pairs[0].fluxRatio).toBeCloseTo(100 / 80, 12);
    expect(response.body.cautions[0]).toMatch(/^Matched by pixel position/);
  });
});

describe('exports of the matched table', () => {
  const query = () => `kind=reference&against=${referenceId}`;

  it('CSV: one row per pair, then ours-only, then theirs-only, with a Content-Disposition', async () => {
    const response = await viewer.get(`/api/runs/${runId}/cross-match?${query()}&format=csv`);
    expect(response.status).toBe(200);
    expect(response.headers['content-type']).toMatch(/^text\/csv/);
    expect(response.headers['content-disposition']).toBe(
      `attachment; filename="skysieve-run-${runId}-cross-match-reference-${referenceId}.csv"`,
    );
    const rows = parseCsv(response.text, { columns: true }) as Record<string, string>[];
    expect(rows.map((r) => r.match)).toEqual(['pair', 'pair', 'ours-only', 'theirs-only', 'theirs-only']);
    expect(rows[0]).toMatchObject({ our_id: '1', their_id: 'AWS-A' });
    expect(Math.abs(Number(rows[0]!.separation) - 1)).toBeLessThan(1e-6);
    expect(Math.abs(Number(rows[1]!.delta_ra_cosdec) + 1.5)).toBeLessThan(1e-6);
    expect(rows[2]!.their_id).toBe('');
    saveText('csv', response.text);
    const astropy = readBackWithAstropy({ csv: join(dir, 'match.csv') }).csv;
    expect(astropy.rows).toHaveLength(5);
  });

  it('VOTable and FITS: read back by astropy with the match radius as a parameter', async () => {
    const vot = await viewer.get(`/api/runs/${runId}/cross-match?${query()}&format=votable`);
    expect(vot.status).toBe(200);
    expect(vot.headers['content-disposition']).toMatch(/cross-match-reference-\d+\.xml"$/);
    saveText('votable', vot.text);
    const fits = await viewer
      .get(`/api/runs/${runId}/cross-match?${query()}&format=fits`)
      .buffer(true)
      .parse((res, callback) => {
        const chunks: Buffer[] = [];
        res.on('data', (chunk: Buffer) => chunks.push(chunk));
        res.on('end', () => callback(null, Buffer.concat(chunks)));
      });
    expect(fits.status).toBe(200);
    expect(fits.headers['content-type']).toBe('application/fits');
    writeFileSync(join(dir, 'match.fits'), fits.body as Buffer);
    const read = readBackWithAstropy({ votable: join(dir, 'match.votable'), fits: join(dir, 'match.fits') });
    expect(read.votable.rows).toHaveLength(5);
    expect(read.votable.params.radius.value).toBeCloseTo(2.25, 12);
    expect(read.votable.params.radius.unit).toBe('arcsec');
    for (const [ucd, ok] of Object.entries(read.votable.ucd_vocabulary_ok)) expect(ok, ucd).toBe(true);
    const names: string[] = read.fits.names;
    const separation = names.indexOf('separation');
    expect(read.fits.rows).toHaveLength(5);
    expect(Math.abs(read.fits.rows[0][separation] - 1)).toBeLessThan(1e-6);
    expect(read.fits.rows[4][separation]).toBeNull();
  });

  it('refuses a download without a target', async () => {
    const response = await viewer.get(`/api/runs/${runId}/cross-match?format=csv`);
    expect(response.status).toBe(400);
  });
});

function saveText(kind: 'csv' | 'votable', text: string): void {
  writeFileSync(join(dir, `match.${kind}`), text);
}

// ---- authorization ----

describe('authorization', () => {
  interface Action {
    name: string;
    call(caller: Caller): Promise<{ status: number; body: { error?: { message: string } } }>;
    expected: Record<Actor, number>;
  }
  let target = 0;
  const actions: Action[] = [
    {
      name: 'preview',
      call: (c) => preview(c, f.project.id, referenceCsv),
      expected: editorsStatuses(200),
    },
    {
      name: 'upload',
      call: (c) => upload(c, f.project.id, referenceCsv),
      expected: editorsStatuses(201),
    },
    {
      name: 'list',
      call: async (c) => c.get(`/api/projects/${f.project.id}/reference-catalogues`),
      expected: readStatuses,
    },
    {
      name: 'read one',
      call: async (c) => c.get(`/api/projects/${f.project.id}/reference-catalogues/${referenceId}`),
      expected: readStatuses,
    },
    {
      name: 'delete',
      call: async (c) => {
        target = (await upload(owner, f.project.id, referenceCsv)).body.id;
        return c.delete(`/api/projects/${f.project.id}/reference-catalogues/${target}`);
      },
      expected: editorsStatuses(204),
    },
    {
      name: 'cross-match',
      call: async (c) =>
        c.post(`/api/runs/${runId}/cross-match`, { against: { kind: 'reference', id: referenceId } }),
      expected: readStatuses,
    },
    {
      name: 'export',
      call: async (c) =>
        c.get(`/api/runs/${runId}/cross-match?kind=reference&against=${referenceId}&format=csv`),
      expected: readStatuses,
    },
  ];

  describe.each(actions)('$name', (action) => {
    it.each(actors)('as %s', async (actor) => {
      const before = await catalogueCount();
      const used = await bytesUsed(f.owner.id);
      const response = await action.call(callers.get(actor)!);
      const expected = action.expected[actor];
      expect(response.status, `${action.name} as ${actor}: ${JSON.stringify(response.body)}`).toBe(expected);
      if (expected === 404) expect(response.body.error?.message).toMatch(/^(Project|Run) not found\.$/);
      if (expected === 401) expect(response.body.error?.message).toBe('Sign in to continue.');
      if (expected === 403)
        expect(response.body.error?.message).toBe('Only project owners and editors can do this.');
      if (action.name === 'upload') {
        expect(await catalogueCount()).toBe(before + (expected === 201 ? 2 : 0));
        if (expected !== 201) expect(await bytesUsed(f.owner.id)).toBe(used);
      }
      if (action.name === 'delete' && expected !== 204) {
        // The catalogue made for this call is still there, and still charged.
        await owner
          .delete(`/api/projects/${f.project.id}/reference-catalogues/${target}`)
          .then((r) => expect(r.status).toBe(204));
      }
    });
  });
});
