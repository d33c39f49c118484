// @vitest-environment node
/**
 * The command line, run as a person would: `npx tsx server/cli/separate.ts …` in a child process, on a small
 * synthetic sky from the committed sample generator (samples/sky-simulator.ts), written as FITS.
 * Checks the files, the CSV header, the WCS cards carried over (FITS WCS paper I keywords, compared card by card
 * with the input header), residual + model = data (the definition of the residual), the input's SHA-256
 * (node:crypto, independent of the CLI) and the one-line errors.
 */
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Jimp } from 'jimp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateSky } from '../../../samples/sky-simulator';
import { parseHeader } from '../../../server/engine/io/header-card';
import { readImage } from '../../../server/engine/io/read-image';
import { writeFits } from '../../../server/engine/io/write-fits';
import { MARKER_RGB } from '../../../server/runs/quicklook-image';

const root = join(import.meta.dirname, '../../..');
let dir = '';
let imagePath = '';

function runCli(args: string[]) {
  const result = spawnSync('npx', ['tsx', 'server/cli/separate.ts', ...args], {
    cwd: root,
    encoding: 'utf8',
    timeout: 170_000,
    env: { ...process.env, FORCE_COLOR: '0' },
  });
  return { status: result.status, stdout: result.stdout, stderr: result.stderr };
}

function headerOf(path: string) {
  const parsed = parseHeader(new Uint8Array(readFileSync(path)), 0);
  if (parsed === null) throw new Error(`${path} has no FITS header`);
  return new Map(parsed.cards.map((card) => [card.keyword, card.value]));
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'skysieve-cli-'));
  const sky = simulateSky({
    width: 64,
    height: 48,
    seed: 7,
    psf: { fwhmMajorPx: 3, fwhmMinorPx: 3, paDeg: 0 },
    diffuse: { level: 2e-4, logStd: 0.5, slope: 3.5 },
    sources: { count: 6, minFlux: 5e-3, maxFlux: 2e-2, minSeparationPx: 8 },
    noise: { kind: 'gaussian', sigma: 1e-4 },
    wcs: { projection: 'SIN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
    unit: 'Jy/beam',
    writeBeam: true,
  });
  imagePath = join(dir, 'small.fits');
  writeFileSync(
    imagePath,
    writeFits({ width: sky.width, height: sky.height, data: sky.image }, { header: sky.header }),
  );
  writeFileSync(join(dir, 'not-an-image.fits'), 'this is plain text, not a FITS file\n');
  writeFileSync(join(dir, 'bad-settings.json'), JSON.stringify({ threshold: -1 }));
});

afterAll(() => {
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe('npm run separate', () => {
  it('writes every output with the input WCS, a CSV catalogue and a complete run record', async () => {
    const out = join(dir, 'out');
    const run = runCli([imagePath, '--out', out, '--formats', 'csv,votable,fits,png']);
    expect(run.status, run.stderr).toBe(0);
    const files = [
      'catalogue.csv',
      'catalogue.vot',
      'catalogue.fits',
      'diffuse.fits',
      'diffuse_sky.fits',
      'compact.fits',
      'model.fits',
      'residual.fits',
      'residual_norm.fits',
      'run.json',
      'quicklook.png',
    ];
    for (const file of files) expect(existsSync(join(out, file)), file).toBe(true);

    const csv = readFileSync(join(out, 'catalogue.csv'), 'utf8').split(/\r?\n/);
    const header = csv[0]!.split(',');
    // Per-beam units (Jy/beam), so flux_density is present too.
    for (const column of ['id', 'x', 'y', 'ra', 'dec', 'flux', 'flux_err', 'snr', 'flux_density']) {
      expect(header, `CSV header ${csv[0]}`).toContain(column);
    }
    expect(csv.filter((line) => line.trim() !== '').length - 1, 'at least one source found').toBeGreaterThan(
      0,
    );

    const input = headerOf(imagePath);
    for (const file of [
      'diffuse.fits',
      'diffuse_sky.fits',
      'compact.fits',
      'model.fits',
      'residual.fits',
      'residual_norm.fits',
    ]) {
      const cards = headerOf(join(out, file));
      for (const keyword of [
        'CTYPE1',
        'CTYPE2',
        'CRPIX1',
        'CRPIX2',
        'CRVAL1',
        'CRVAL2',
        'CDELT1',
        'CDELT2',
        'BMAJ',
        'BMIN',
        'BPA',
      ]) {
        expect(cards.get(keyword), `${file} ${keyword}`).toEqual(input.get(keyword));
      }
      expect(cards.get('BITPIX'), file).toBe(-32);
    }
    expect(headerOf(join(out, 'diffuse.fits')).get('BUNIT')).toBe('Jy/beam');
    expect(headerOf(join(out, 'residual_norm.fits')).has('BUNIT'), 'normalised residual has no unit').toBe(
      false,
    );

    // residual = data − model, to float32 rounding of the three images (values ≲ 0.05, so ≤ 1e-8 absolute).
    const data = readImage(new Uint8Array(readFileSync(imagePath)));
    const model = readImage(new Uint8Array(readFileSync(join(out, 'model.fits'))));
    const residual = readImage(new Uint8Array(readFileSync(join(out, 'residual.fits'))));
    let worst = 0;
    for (let i = 0; i < data.data.length; i++) {
      worst = Math.max(worst, Math.abs(data.data[i]! - model.data[i]! - residual.data[i]!));
    }
    expect(worst, 'max |data − model − residual|').toBeLessThan(1e-8);

    const record = JSON.parse(readFileSync(join(out, 'run.json'), 'utf8'));
    expect(record.input.sha256).toBe(createHash('sha256').update(readFileSync(imagePath)).digest('hex'));
    expect(record.software.version).toBe(
      JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')).version,
    );
    expect(record.settings.threshold).toBe(5);
    expect(record.settings.likelihood).toBe('gaussian');
    expect(record.noise.source).toBe('estimated');
    // The simulated noise σ is 1e-4; a robust estimate on 3072 pixels is within ±15 % (rule of thumb).
    expect(Math.abs(record.noise.sigma / 1e-4 - 1)).toBeLessThan(0.15);
    expect(record.iterations).toBeGreaterThan(0);
    expect(record.evaluations).toBeGreaterThanOrEqual(record.iterations);
    expect(typeof record.converged).toBe('boolean');
    expect(Number.isFinite(record.finalObjective)).toBe(true);
    expect(record.wallTimeSeconds).toBeGreaterThan(0);
    expect(record.psf.fwhmPx.major).toBeCloseTo(3, 6); // from BMAJ = 4.5″ at 1.5″ per pixel
    expect(record.spectrum).toHaveProperty('slope');

    // quicklook.png: 64 × 48 magnified 4× (the largest whole factor ≤ 4 within 1024 px); a ring of marker
    // pixels around the first catalogue source, whose centre (x − 0.5)·4 − 0.5, 191 − ((y − 0.5)·4 − 0.5) is
    // not marked (a ring, not a disc).
    const picture = await Jimp.read(readFileSync(join(out, 'quicklook.png')));
    expect([picture.bitmap.width, picture.bitmap.height]).toEqual([256, 192]);
    const [x, y] = ['x', 'y'].map((column) => Number(csv[1]!.split(',')[header.indexOf(column)]));
    const centre = {
      column: Math.round((x! - 0.5) * 4 - 0.5),
      row: Math.round(191 - ((y! - 0.5) * 4 - 0.5)),
    };
    const marked = (column: number, row: number) => {
      const i = 4 * (row * 256 + column);
      return [0, 1, 2].every((k) => picture.bitmap.data[i + k] === MARKER_RGB[k]);
    };
    let ring = 0;
    for (let row = centre.row - 8; row <= centre.row + 8; row++) {
      for (let column = centre.column - 8; column <= centre.column + 8; column++) {
        if (row >= 0 && row < 192 && column >= 0 && column < 256 && marked(column, row)) ring++;
      }
    }
    // A ring of radius 6 px (FWHM 3 px · 4 / 2) and width 1.5 px covers about 2π·6·1.5 ≈ 57 pixels.
    expect(ring).toBeGreaterThan(30);
    expect(marked(centre.column, centre.row)).toBe(false);
  }, 180_000);

  it('passes --psf-fwhm, --sigma and --likelihood into the settings', () => {
    const out = join(dir, 'out-options');
    const run = runCli([
      imagePath,
      '--out',
      out,
      '--psf-fwhm',
      '3.2,2.8,20',
      '--sigma',
      '1e-4',
      '--likelihood',
      'gaussian',
    ]);
    expect(run.status, run.stderr).toBe(0);
    const record = JSON.parse(readFileSync(join(out, 'run.json'), 'utf8'));
    expect(record.settings.psf).toEqual({ fwhmMajor: 3.2, fwhmMinor: 2.8, pa: 20 });
    expect(record.settings.noiseSigma).toBe(1e-4);
    expect(record.noise).toMatchObject({ sigma: 1e-4, source: 'given' });
  }, 180_000);

  it.each([
    ['a file that is not an image', ['not-an-image.fits'], /FITS/],
    [
      'a per-image option for an image not given',
      ['small.fits', 'small.fits', '--sigma', '3:0.1'],
      /^--sigma 3:… names image 3, but 2 images were given$/,
    ],
    [
      'a settings file with a bad value',
      ['small.fits', '--settings', 'bad-settings.json'],
      /^setting threshold: /,
    ],
    ['a missing image', ['missing.fits'], /^Cannot read .*missing\.fits: no such file$/],
    ['a bad --psf-fwhm', ['small.fits', '--psf-fwhm', '3,x,0'], /--psf-fwhm needs MAJ,MIN,PA/],
  ])(
    'refuses %s with exit code 1 and one line on stderr',
    (_what, args, message) => {
      const out = join(dir, `out-bad-${args.join('-').replace(/[^a-z0-9]/gi, '')}`);
      const run = runCli([
        ...args.map((a) => (a.endsWith('.fits') || a.endsWith('.json') ? join(dir, a) : a)),
        '--out',
        out,
      ]);
      expect(run.status).toBe(1);
      const lines = run.stderr.split('\n').filter((line) => line.trim() !== '');
      expect(lines, `stderr: ${run.stderr}`).toHaveLength(1);
      expect(lines[0]).toMatch(message);
      expect(run.stderr).not.toMatch(/\n\s+at /);
      expect(existsSync(join(out, 'run.json')), 'nothing written').toBe(false);
    },
    60_000,
  );

  it('says which option is missing when --out is left out', () => {
    const run = runCli([imagePath]);
    expect(run.status).toBe(1);
    expect(run.stderr.trim()).toBe("required option '--out <dir>' not specified");
  }, 60_000);
});
