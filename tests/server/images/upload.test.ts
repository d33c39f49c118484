// @vitest-environment node
/**
 * Issue 5, images: uploads of every supported format, every refusal class with its exact message, the stored
 * summary (statistics, noise, WCS, beam), list / detail / rename / download / thumbnail / pixel view.
 */
import { readFileSync } from 'node:fs';

import { Jimp } from 'jimp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { readImageAsync } from '../../../server/engine/io/read-image';
import { THREAD_MIN_BYTES } from '../../../server/images/analysis-thread';
import { analyseImage } from '../../../server/images/image-analysis';
import { decodePixelView, type ImageDetail, type ImageSummary } from '../../../shared/images';
import { Membership } from '../../../server/models/membership';
import { Project } from '../../../server/models/project';
import { User } from '../../../server/models/user';
import {
  apiError,
  type BrowserClient,
  createUser,
  signIn,
  startTestApp,
  type TestApp,
} from '../../support/test-app';
import {
  binary,
  fitsFile,
  gzipped,
  noisePlane,
  rasterFile,
  skyCards,
  tiffFile,
  uploadAs,
} from './image-files';

let t: TestApp;
let owner: User;
let client: BrowserClient;

beforeAll(async () => {
  t = await startTestApp();
  owner = await createUser(t.ctx);
  client = await signIn(t.app, owner.email);
});
afterAll(async () => {
  await t?.close();
});

/** Asserts a 201 (printing the body otherwise) and returns the response. */
function stored<R extends { status: number; body: unknown }>(response: R): R {
  expect(response.status, JSON.stringify(response.body)).toBe(201);
  return response;
}

async function newProject(name = 'Lyra uploads'): Promise<Project> {
  const project = await Project.query().insertAndFetch({ name, description: '', ownerId: owner.id });
  await Membership.query().insert({ projectId: project.id, userId: owner.id, role: 'owner' });
  return project;
}

const fixtureFolder = new URL('../../fixtures/astropy/', import.meta.url);
interface FixtureCase {
  file: string;
  width: number;
  height: number;
  plane?: number | null;
  tolerance?: number;
  pixels: (number | null)[];
}
const fitsCases = (
  JSON.parse(readFileSync(new URL('fits/cases.json', fixtureFolder), 'utf8')) as { cases: FixtureCase[] }
).cases;
const rasterCases = (
  JSON.parse(readFileSync(new URL('raster/cases.json', fixtureFolder), 'utf8')) as { cases: FixtureCase[] }
).cases;

/** Naive reference statistics of the valid pixels: sort for the median, plain sums for the mean. */
function referenceStatistics(pixels: (number | null)[]) {
  const valid = pixels.filter((v): v is number => v !== null && Number.isFinite(v)).sort((a, b) => a - b);
  const n = valid.length;
  const mean = valid.reduce((sum, v) => sum + v, 0) / n;
  const median = n % 2 ? valid[(n - 1) / 2]! : (valid[n / 2 - 1]! + valid[n / 2]!) / 2;
  return { min: valid[0]!, max: valid[n - 1]!, mean, median, validPixels: n, blankPixels: pixels.length - n };
}

function expectClose(what: string, actual: number, expected: number, tolerance: number) {
  const difference = Math.abs(actual - expected);
  expect(
    difference,
    `${what}: expected ${expected}, got ${actual}, difference ${difference}, tolerance ${tolerance}`,
  ).toBeLessThanOrEqual(tolerance);
}

describe('every supported format, checked against the astropy / PIL fixtures', () => {
  it('finds the fixtures', () => {
    expect(fitsCases.length).toBe(17);
    expect(rasterCases.length).toBe(9);
  });

  it('stores each fixture file with statistics equal to the reference values of its pixels', async () => {
    const project = await newProject('Fixtures');
    for (const [folder, cases] of [
      ['fits', fitsCases],
      ['raster', rasterCases],
    ] as const) {
      for (const c of cases) {
        const bytes = readFileSync(new URL(`${folder}/${c.file}`, fixtureFolder));
        const fields: Record<string, string> = c.plane ? { plane: String(c.plane) } : {};
        const response = await uploadAs(client, project.id, bytes, c.file, fields);
        expect(response.status, `${c.file}: ${JSON.stringify(response.body)}`).toBe(201);
        const summary = response.body as ImageSummary;
        expect(summary.width).toBe(c.width);
        expect(summary.height).toBe(c.height);
        expect(summary.fileBytes).toBe(bytes.length);
        expect(summary.gzipped).toBe(c.file.endsWith('.gz'));
        const reference = referenceStatistics(c.pixels);
        // Pixels are stored as float32: relative 2^-24 of the largest value, plus the fixture's own decoding tolerance.
        const scale = Math.max(Math.abs(reference.min), Math.abs(reference.max));
        const tolerance = (c.tolerance ?? 0) + scale * 2 ** -23;
        for (const key of ['min', 'max', 'mean', 'median'] as const) {
          expectClose(`${c.file} ${key}`, summary.statistics[key], reference[key], tolerance);
        }
        expect(summary.statistics.validPixels).toBe(reference.validPixels);
        expect(summary.statistics.blankPixels).toBe(reference.blankPixels);
      }
    }
    const list = await client.get(`/api/projects/${project.id}/images`).expect(200);
    expect((list.body as ImageSummary[]).length).toBe(26);
  });

  it('FITS, FITS.gz, TIFF, PNG and JPEG made here report their format', async () => {
    const project = await newProject('Formats');
    const plane = noisePlane(40, 32, 11);
    const fits = fitsFile(plane, skyCards());
    const files: [Buffer, string, string][] = [
      [fits, 'field.fits', 'fits'],
      [gzipped(fitsFile(noisePlane(40, 32, 12))), 'field.fits.gz', 'fits'],
      [tiffFile(noisePlane(40, 32, 13)), 'field.tif', 'tiff'],
      [await rasterFile(40, 32, 14, 'image/png'), 'field.png', 'png'],
      [await rasterFile(40, 32, 15, 'image/jpeg'), 'field.jpg', 'jpeg'],
    ];
    for (const [bytes, name, format] of files) {
      const response = await uploadAs(client, project.id, bytes, name);
      expect(response.status, `${name}: ${JSON.stringify(response.body)}`).toBe(201);
      expect((response.body as ImageSummary).format).toBe(format);
      expect((response.body as ImageSummary).name).toBe(name);
    }
  });
});

describe('what is stored about an image', () => {
  it('the sample radio map: WCS, beam and noise match the simulation that made it', async () => {
    const project = await newProject('Sample');
    const bytes = readFileSync(new URL('../../../samples/aws-lyra-radio.fits', import.meta.url));
    const truth = JSON.parse(
      readFileSync(new URL('../../../samples/aws-lyra-radio.truth.json', import.meta.url), 'utf8'),
    ) as { noise: { sigma: number }; psf: { beamAreaPx: number } };
    const response = await uploadAs(client, project.id, bytes, 'aws-lyra-radio.fits');
    expect(response.status, JSON.stringify(response.body)).toBe(201);
    const summary = response.body as ImageSummary;
    expect(summary.unit).toBe('Jy/beam');
    expect(summary.wcs).toMatchObject({
      celestial: true,
      projection: 'SIN',
      frame: 'ICRS',
      ctype: ['RA---SIN', 'DEC--SIN'],
      referencePixel: [256.5, 192.5],
      referenceValue: [283.75, 38.6],
      cdelt1Sign: -1,
    });
    // CDELT = 1.5″ in the header.
    expectClose('pixel scale 1', summary.wcs!.pixelScaleArcsec[0], 1.5, 1e-9);
    expectClose('pixel scale 2', summary.wcs!.pixelScaleArcsec[1], 1.5, 1e-9);
    // The image centre ((512+1)/2, (384+1)/2) = CRPIX is the reference point itself (paper II: x = 0 ↦ CRVAL).
    expectClose('centre lon', summary.wcs!.centre!.lon, 283.75, 1e-9);
    expectClose('centre lat', summary.wcs!.centre!.lat, 38.6, 1e-9);
    // Beam 6.75″ × 4.8″; area π θmaj θmin / (4 ln 2) / (1.5″)² (Gaussian beam solid angle, radio handbook formula).
    expectClose('BMAJ', summary.beam!.majorArcsec, 6.75, 1e-9);
    expectClose('BMIN', summary.beam!.minorArcsec, 4.8, 1e-9);
    expect(summary.beam!.paDeg).toBe(35);
    expectClose(
      'beam area',
      summary.beam!.areaPixels!,
      (Math.PI * 6.75 * 4.8) / (4 * Math.LN2) / 1.5 ** 2,
      1e-9,
    );
    expectClose('beam area vs truth file', summary.beam!.areaPixels!, truth.psf.beamAreaPx, 1e-5);
    // The simulation added white Gaussian noise of σ = 20 µJy/beam; allow 10 % (sources and diffuse remain).
    expectClose('noise σ', summary.noise!.sigma, truth.noise.sigma, 0.1 * truth.noise.sigma);
    expect(summary.noise!.sigmaUncertainty).toBeGreaterThan(0);
    expect(summary.noise!.sigmaUncertainty).toBeLessThan(0.05 * summary.noise!.sigma);

    const detail = (await client.get(`/api/images/${summary.id}`).expect(200)).body as ImageDetail;
    expect(detail.originalAxes).toEqual([512, 384]);
    expect(detail.header.find((card) => card.keyword === 'CTYPE1')?.value).toBe('RA---SIN');
    expect(detail.header.find((card) => card.keyword === 'BPA')?.value).toBe(35);
  });

  it('a noise image of known σ gets that σ back; blank pixels are counted', async () => {
    const project = await newProject('Noise');
    const plane = noisePlane(96, 80, 21, 2.5, 100);
    const mask = new Uint8Array(plane.data.length).fill(1);
    for (let i = 0; i < 96 * 5; i++) mask[i] = 0; // the five bottom rows blank
    const response = await uploadAs(client, project.id, fitsFile(plane, [], mask), 'noise.fits');
    expect(response.status, JSON.stringify(response.body)).toBe(201);
    const summary = response.body as ImageSummary;
    expect(summary.statistics.blankPixels).toBe(96 * 5);
    expect(summary.statistics.validPixels).toBe(96 * 75);
    // Parameter recovery: σ = 2.5 within 3 standard errors of a MAD estimate from ~7000 values (≈ 2 %).
    expectClose('σ', summary.noise!.sigma, 2.5, 0.15);
    expectClose('mean', summary.statistics.mean, 100, 0.1);
    expectClose('standard deviation', summary.statistics.standardDeviation, 2.5, 0.1);
    expect(summary.wcs).toBeNull();
    expect(summary.beam).toBeNull();
  });

  it('a large file is read in a worker thread with the same results as inline; its refusals keep their message', async () => {
    const project = await newProject('Large');
    const plane = noisePlane(1000, 800, 27, 0.5, 3);
    const bytes = fitsFile(plane, skyCards());
    expect(bytes.length).toBeGreaterThanOrEqual(THREAD_MIN_BYTES);
    // Two at once: the second waits for the analysis slot of the first.
    const [first, second] = await Promise.all([
      uploadAs(client, project.id, bytes, 'large.fits'),
      uploadAs(client, project.id, fitsFile(noisePlane(1000, 800, 28, 0.5, 3)), 'large-2.fits'),
    ]);
    stored(second);
    const summary = stored(first).body as ImageSummary;
    const inline = analyseImage(await readImageAsync(bytes));
    expect(summary.statistics).toEqual(inline.statistics);
    expect(summary.noise).toEqual(inline.noise);
    expect(summary.wcs).toEqual(inline.wcs);
    expectClose('σ', summary.noise!.sigma, 0.5, 0.01); // σ = 0.5 put in; ~800 000 samples
    const view = decodePixelView(
      new Uint8Array(
        (await client.get(`/api/images/${summary.id}/pixels?maxSize=4096`).buffer(true).parse(binary))
          .body as Buffer,
      ),
    );
    expect(view.data).toEqual(plane.data);
    const cut = await uploadAs(client, project.id, bytes.subarray(0, 2_500_000), 'large-cut.fits');
    expect(cut.status).toBe(422);
    expect(cut.body).toEqual({
      error: {
        code: 'unprocessable',
        message: 'The FITS file is truncated: its data need 3200000 bytes after the header, got 2497120',
        details: { reason: 'truncated' },
      },
    });
  });

  it('rename, download the original byte for byte, thumbnail PNG with north up', async () => {
    const project = await newProject('Views');
    const width = 40;
    const height = 32;
    const plane = noisePlane(width, height, 31, 0.1, 1);
    for (let y = height - 4; y < height; y++) for (let x = 0; x < 4; x++) plane.data[y * width + x] = 50; // top left
    const bytes = fitsFile(plane, skyCards());
    const created = stored(await uploadAs(client, project.id, bytes, 'views.fits')).body as ImageSummary;

    const renamed = await client.patch(`/api/images/${created.id}`, { name: '  Lyra core  ' });
    expect(renamed.status).toBe(200);
    expect((renamed.body as ImageSummary).name).toBe('Lyra core');
    const empty = await client.patch(`/api/images/${created.id}`, { name: ' ' });
    expect(empty.status).toBe(400);
    expect(empty.body).toEqual(apiError('validation_failed', 'name: Enter an image name.'));

    const original = await client
      .get(`/api/images/${created.id}/original`)
      .buffer(true)
      .parse(binary)
      .expect(200);
    expect(Buffer.compare(original.body as Buffer, bytes)).toBe(0);
    expect(original.headers['content-type']).toBe('application/fits');
    expect(original.headers['content-disposition']).toBe('attachment; filename=views.fits');

    const thumbnail = await client
      .get(`/api/images/${created.id}/thumbnail`)
      .buffer(true)
      .parse(binary)
      .expect(200);
    expect(thumbnail.headers['content-type']).toBe('image/png');
    // Decoded by jimp, an independent PNG decoder.
    const picture = await Jimp.read(thumbnail.body as Buffer);
    expect([picture.width, picture.height]).toEqual([width, height]);
    const grey = (x: number, y: number) => (picture.getPixelColor(x, y) >>> 24) & 0xff;
    expect(grey(1, 1)).toBe(255); // the bright block is in the top-left corner of the PNG (north up)
    expect(grey(1, height - 2)).toBeLessThan(128);
    const again = await client
      .get(`/api/images/${created.id}/thumbnail`)
      .set('if-none-match', thumbnail.headers.etag!);
    expect(again.status).toBe(304);
  });

  it('the thumbnail of a large image is at most 256 pixels on its longer side', async () => {
    const project = await newProject('Large thumbnail');
    const created = stored(
      await uploadAs(client, project.id, fitsFile(noisePlane(600, 300, 41)), 'wide.fits'),
    ).body as ImageSummary;
    const thumbnail = await client
      .get(`/api/images/${created.id}/thumbnail`)
      .buffer(true)
      .parse(binary)
      .expect(200);
    const picture = await Jimp.read(thumbnail.body as Buffer);
    // Factor ceil(600 / 256) = 3 → 200 × 100.
    expect([picture.width, picture.height]).toEqual([200, 100]);
  });

  it('the pixel view: block means computed here, NaN for blank blocks, ETag 304', async () => {
    const project = await newProject('Pixel view');
    const width = 40;
    const height = 33;
    const plane = noisePlane(width, height, 51);
    const mask = new Uint8Array(plane.data.length).fill(1);
    for (let y = 0; y < 3; y++) for (let x = 0; x < 3; x++) mask[y * width + x] = 0; // first 3 × 3 block blank
    mask[5 * width + 7] = 0;
    const created = stored(await uploadAs(client, project.id, fitsFile(plane, [], mask), 'view.fits'))
      .body as ImageSummary;
    const response = await client
      .get(`/api/images/${created.id}/pixels?maxSize=16`)
      .buffer(true)
      .parse(binary)
      .expect(200);
    expect(response.headers['content-type']).toBe('application/octet-stream');
    const view = decodePixelView(new Uint8Array(response.body as Buffer));
    // Smallest factor with ceil(40 / f) ≤ 16 is 3: 14 × 11 view pixels.
    expect([view.width, view.height, view.factor, view.sourceWidth, view.sourceHeight]).toEqual([
      14, 11, 3, 40, 33,
    ]);
    expect(view.blankPixels).toBe(1);
    expect(view.data[0]).toBeNaN();
    // Naive reference: mean of the valid float32 values of each block.
    for (let j = 0; j < view.height; j++) {
      for (let i = 0; i < view.width; i++) {
        if (i === 0 && j === 0) continue;
        let sum = 0;
        let n = 0;
        for (let y = j * 3; y < Math.min((j + 1) * 3, height); y++) {
          for (let x = i * 3; x < Math.min((i + 1) * 3, width); x++) {
            if (mask[y * width + x] !== 1) continue;
            sum += plane.data[y * width + x]!;
            n++;
          }
        }
        expectClose(`view (${i}, ${j})`, view.data[j * view.width + i]!, Math.fround(sum / n), 1e-5);
      }
    }
    const etag = response.headers.etag!;
    expect(etag).toMatch(/^"pixels-v1-[0-9a-f]{32}-16"$/);
    const cached = await client.get(`/api/images/${created.id}/pixels?maxSize=16`).set('if-none-match', etag);
    expect(cached.status).toBe(304);
    const other = await client.get(`/api/images/${created.id}/pixels?maxSize=64`).set('if-none-match', etag);
    expect(other.status).toBe(200);
    const full = decodePixelView(
      new Uint8Array(
        (await client.get(`/api/images/${created.id}/pixels?maxSize=64`).buffer(true).parse(binary))
          .body as Buffer,
      ),
    );
    expect([full.width, full.height, full.factor]).toEqual([40, 33, 1]);
    expect(full.data[40 * 33 - 1]).toBe(plane.data[40 * 33 - 1]);
    const bad = await client.get(`/api/images/${created.id}/pixels?maxSize=8`);
    expect(bad.status).toBe(400);
    expect(bad.body).toEqual(apiError('validation_failed', 'maxSize: maxSize must be at least 16.'));
  });
});

describe('refusals, with the exact message', () => {
  let small: TestApp;
  let smallClient: BrowserClient;
  beforeAll(async () => {
    // A second app on the same database with small limits.
    small = await startTestApp({ uploadMaxBytes: 100_000, maxImagePixels: 10_000 }, t.db);
    smallClient = await signIn(small.app, owner.email);
  });
  afterAll(async () => {
    await small?.close();
  });

  it('413 beyond the upload limit, naming the size and the limit', async () => {
    const project = await newProject('Too large');
    const bytes = Buffer.alloc(300_000, 7);
    const response = await uploadAs(smallClient, project.id, bytes, 'huge.fits');
    expect(response.status).toBe(413);
    // 300 000 bytes (+ a few hundred of multipart framing) = 293 KiB; the limit 100 000 bytes = 97.7 KiB.
    expect(response.body).toEqual(
      apiError('payload_too_large', 'The file is 293 KiB; the upload limit is 97.7 KiB.'),
    );
    expect(await project.$relatedQuery('memberships').resultSize()).toBe(1);
  });

  it('422 with the reader message and code for each kind of unreadable file', async () => {
    const project = await newProject('Unreadable');
    const fits = fitsFile(noisePlane(40, 32, 61));
    const blank = fitsFile(noisePlane(40, 32, 62), [], new Uint8Array(40 * 32));
    const cases: [Buffer, string, string, string][] = [
      [
        Buffer.from('a catalogue, not an image\n'),
        'notes.txt',
        'unknown-format',
        'The file is not a FITS, TIFF, PNG or JPEG image (its first bytes match none)',
      ],
      [
        Buffer.from('a catalogue, not an image\n'),
        'notes.fits',
        'not-fits',
        'This is not a FITS file: it does not begin with SIMPLE = T',
      ],
      [Buffer.alloc(0), 'empty.fits', 'empty-file', 'The file is empty'],
      [
        fits.subarray(0, 4000),
        'cut.fits',
        'truncated',
        'The FITS file is truncated: its data need 5120 bytes after the header, got 1120',
      ],
      [blank, 'blank.fits', 'all-blank', 'Every pixel of the image is blank (BLANK or NaN)'],
      [
        gzipped(fits).subarray(0, 200),
        'cut.fits.gz',
        'bad-gzip',
        'The gzip data are corrupt or incomplete (unexpected end of file)',
      ],
    ];
    for (const [bytes, name, reason, message] of cases) {
      const response = await uploadAs(client, project.id, bytes, name);
      expect(response.status, name).toBe(422);
      expect(response.body, name).toEqual({ error: { code: 'unprocessable', message, details: { reason } } });
    }
    const tooMany = await uploadAs(smallClient, project.id, fitsFile(noisePlane(128, 100, 63)), 'big.fits');
    expect(tooMany.status).toBe(422);
    expect(tooMany.body).toEqual({
      error: {
        code: 'unprocessable',
        message: 'The image has 128×100 = 12800 pixels, more than the limit of 10000',
        details: { reason: 'too-many-pixels' },
      },
    });
    const list = await client.get(`/api/projects/${project.id}/images`).expect(200);
    expect(list.body).toEqual([]);
    expect((await User.query().findById(owner.id))!.bytesUsed).toBe(await usedByImages(owner.id));
  });

  it('400 without a file in the field "file"', async () => {
    const project = await newProject('No file');
    const token = await client.csrfToken();
    const wrongField = await client.agent
      .post(`/api/projects/${project.id}/images`)
      .set('x-csrf-token', token)
      .attach('image', Buffer.from('x'), 'x.fits');
    expect(wrongField.status).toBe(400);
    expect(wrongField.body).toEqual(apiError('bad_request', 'Send exactly one image, in the field "file".'));
    const json = await client.post(`/api/projects/${project.id}/images`, { file: 'abc' });
    expect(json.status).toBe(400);
    expect(json.body).toEqual(
      apiError('bad_request', 'Send the image as multipart/form-data with the file in the field "file".'),
    );
  });

  it('409 for the same file twice in one project; another project takes it', async () => {
    const project = await newProject('Duplicates');
    const bytes = fitsFile(noisePlane(40, 32, 71));
    stored(await uploadAs(client, project.id, bytes, 'first.fits', { name: 'Lyra north' }));
    const again = await uploadAs(client, project.id, bytes, 'copy.fits');
    expect(again.status).toBe(409);
    expect(again.body).toEqual(apiError('conflict', 'This image is already in the project as «Lyra north».'));
    const elsewhere = await newProject('Elsewhere');
    stored(await uploadAs(client, elsewhere.id, bytes, 'copy.fits'));
  });
});

async function usedByImages(userId: number): Promise<number> {
  const row = (await t.ctx
    .knex('images')
    .where('uploaded_by_id', userId)
    .sum('file_bytes as total')
    .first()) as {
    total: string | number | null;
  };
  return Number(row.total ?? 0);
}

describe('quotas', () => {
  it('413 over quota with used / quota / needed; nothing stored', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 20_000 });
    const userClient = await signIn(t.app, user.email);
    const project = await Project.query().insertAndFetch({
      name: 'Quota',
      description: '',
      ownerId: user.id,
    });
    await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
    // 40 × 32 float32 FITS: one header block + 5120 data bytes padded to 2 blocks = 8640 bytes.
    const first = fitsFile(noisePlane(40, 32, 81));
    expect(first.length).toBe(8640);
    stored(await uploadAs(userClient, project.id, first, 'a.fits'));
    stored(await uploadAs(userClient, project.id, fitsFile(noisePlane(40, 32, 82)), 'b.fits'));
    const third = await uploadAs(userClient, project.id, fitsFile(noisePlane(40, 32, 83)), 'c.fits');
    expect(third.status).toBe(413);
    // used 17 280 bytes = 16.9 KiB; quota 20 000 = 19.5 KiB; free 2720 = 2.66 KiB; needed 8640 = 8.44 KiB.
    expect(third.body).toEqual({
      error: {
        code: 'payload_too_large',
        message:
          'Not enough storage: you use 16.9 KiB of your 19.5 KiB quota (2.66 KiB free) and this needs 8.44 KiB. ' +
          'Delete images or results you no longer need, or ask an administrator for a larger quota.',
        details: { usedBytes: 17_280, quotaBytes: 20_000, neededBytes: 8640 },
      },
    });
    expect((await User.query().findById(user.id))!.bytesUsed).toBe(17_280);
    expect(await usedByImages(user.id)).toBe(17_280);
  });

  it('8 parallel uploads against a quota for 3 end with exactly 3 stored and the counter equal to their sum', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 3 * 8640 + 5000 });
    const userClient = await signIn(t.app, user.email);
    const project = await Project.query().insertAndFetch({ name: 'Race', description: '', ownerId: user.id });
    await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
    const files = Array.from({ length: 8 }, (_, k) => fitsFile(noisePlane(40, 32, 900 + k)));
    const token = await userClient.csrfToken();
    const responses = await Promise.all(
      files.map((bytes, k) =>
        userClient.agent
          .post(`/api/projects/${project.id}/images`)
          .set('x-csrf-token', token)
          .attach('file', bytes, `race-${k}.fits`),
      ),
    );
    const statuses = responses.map((response) => response.status).sort();
    expect(statuses).toEqual([201, 201, 201, 413, 413, 413, 413, 413]);
    const fresh = (await User.query().findById(user.id))!;
    expect(fresh.bytesUsed).toBe(3 * 8640);
    expect(fresh.bytesUsed).toBeLessThanOrEqual(fresh.quotaBytes);
    expect(await usedByImages(user.id)).toBe(fresh.bytesUsed);
  });

  it('deleting an image frees its bytes; deleting the project frees the rest', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 100_000 });
    const userClient = await signIn(t.app, user.email);
    const project = await Project.query().insertAndFetch({ name: 'Free', description: '', ownerId: user.id });
    await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
    const a = stored(await uploadAs(userClient, project.id, fitsFile(noisePlane(40, 32, 91)), 'a.fits'))
      .body as ImageSummary;
    const b = stored(await uploadAs(userClient, project.id, tiffFile(noisePlane(40, 32, 92)), 'b.tif'))
      .body as ImageSummary;
    expect((await User.query().findById(user.id))!.bytesUsed).toBe(a.fileBytes + b.fileBytes);
    await userClient.delete(`/api/images/${a.id}`).then((response) => expect(response.status).toBe(204));
    expect((await User.query().findById(user.id))!.bytesUsed).toBe(b.fileBytes);
    expect(await t.ctx.knex('image_blobs').where('image_id', a.id).first()).toBeUndefined();
    const gone = await userClient.get(`/api/images/${a.id}`);
    expect(gone.status).toBe(404);
    expect(gone.body).toEqual(apiError('not_found', 'Image not found.'));
    await userClient
      .delete(`/api/projects/${project.id}`, { confirmName: 'Free' })
      .then((response) => expect(response.status).toBe(204));
    expect((await User.query().findById(user.id))!.bytesUsed).toBe(0);
  });

  it('admins see usage per account and per project', async () => {
    const admin = await createUser(t.ctx, { role: 'admin' });
    const adminClient = await signIn(t.app, admin.email);
    const user = await createUser(t.ctx, { quotaBytes: 100_000 });
    const userClient = await signIn(t.app, user.email);
    const project = await Project.query().insertAndFetch({
      name: 'Usage',
      description: '',
      ownerId: user.id,
    });
    await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
    const a = stored(await uploadAs(userClient, project.id, fitsFile(noisePlane(40, 32, 95)), 'a.fits'))
      .body as ImageSummary;
    const usage = await adminClient.get('/api/admin/storage').expect(200);
    const body = usage.body as {
      users: {
        userId: number;
        bytesUsed: number;
        imageCount: number;
        imageBytes: number;
        quotaBytes: number;
      }[];
      projects: { projectId: number; imageCount: number; imageBytes: number }[];
    };
    expect(body.users.find((row) => row.userId === user.id)).toEqual(
      expect.objectContaining({
        bytesUsed: a.fileBytes,
        imageCount: 1,
        imageBytes: a.fileBytes,
        quotaBytes: 100_000,
      }),
    );
    expect(body.projects.find((row) => row.projectId === project.id)).toEqual(
      expect.objectContaining({ imageCount: 1, imageBytes: a.fileBytes }),
    );
    const refused = await userClient.get('/api/admin/storage');
    expect(refused.status).toBe(403);
    expect(refused.body).toEqual(apiError('forbidden', 'Only administrators can do this.'));
  });
});
