// @vitest-environment node
/**
 * The command line with several images (`npx tsx server/cli/separate.ts A.fits B.fits --out DIR`), run as a
 * person would on a synthetic pair from samples/joint-pair.ts written as FITS: the files, the run record's
 * provenance of both inputs (SHA-256 from node:crypto, independent of the CLI), residual + model = data per
 * image (the definition of the residual), per-image options by number, and one-line refusals.
 */
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateJointPair } from '../../../samples/joint-pair';
import { readImage } from '../../../server/engine/io/read-image';
import { writeFits } from '../../../server/engine/io/write-fits';

const root = join(import.meta.dirname, '../../..');
let dir = '';

function runCli(args: string[]) {
  const result = spawnSync('npx', ['tsx', 'server/cli/separate.ts', ...args], {
    cwd: root,
    encoding: 'utf8',
    timeout: 170_000,
    env: { ...process.env, FORCE_COLOR: '0' },
  });
  return { status: result.status, stdout: result.stdout, stderr: result.stderr };
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'skysieve-joint-cli-'));
  const pair = simulateJointPair({
    size: 96,
    seed: 5,
    sharp: { fwhmPx: 3, sigma: 1 },
    smooth: { fwhmFinePx: 9, sigma: 0.5, scaleError: 1.07 },
    diffuse: { level: 5, logStd: 0.6, slope: 4 },
    sources: { count: 12, minFlux: 3, maxFlux: 40, minSeparationPx: 6 },
  });
  writeFileSync(
    join(dir, 'sharp.fits'),
    writeFits({ width: 96, height: 96, data: pair.sharp.image }, { header: pair.sharp.header }),
  );
  writeFileSync(
    join(dir, 'smooth.fits'),
    writeFits({ width: 48, height: 48, data: pair.smooth.image }, { header: pair.smooth.header }),
  );
  const noWcs = pair.smooth.header.filter((c) => !/^(CTYPE|CRPIX|CRVAL|CDELT|CUNIT)/.test(c.keyword));
  writeFileSync(
    join(dir, 'no-wcs.fits'),
    writeFits({ width: 48, height: 48, data: pair.smooth.image }, { header: noWcs }),
  );
});

afterAll(() => {
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe('npm run separate with several images', () => {
  it('fits them jointly and writes the components of every image, the common grid and the provenance', () => {
    const out = join(dir, 'out');
    const run = runCli([
      join(dir, 'sharp.fits'),
      join(dir, 'smooth.fits'),
      '--out',
      out,
      '--sigma',
      '2:0.5',
      '--scale-prior',
      '0.1',
    ]);
    expect(run.status, run.stderr).toBe(0);
    expect(run.stderr).toMatch(/Joint fit of 2 images: \d+ sources; c2 = 1\.\d{4} ± 0\.\d{4};/);
    const files = [
      'catalogue.csv',
      'run.json',
      'common_diffuse_sky.fits',
      'common_compact_sky.fits',
      ...[1, 2].flatMap((i) =>
        ['diffuse', 'compact', 'model', 'residual', 'residual_norm'].map((p) => `image${i}_${p}.fits`),
      ),
    ];
    for (const f of files) expect(existsSync(join(out, f)), f).toBe(true);

    const record = JSON.parse(readFileSync(join(out, 'run.json'), 'utf8'));
    expect(record.kind).toBe('joint');
    expect(record.inputs).toHaveLength(2);
    for (const [i, name] of ['sharp.fits', 'smooth.fits'].entries()) {
      const sha = createHash('sha256')
        .update(readFileSync(join(dir, name)))
        .digest('hex');
      expect(record.inputs[i]).toMatchObject({ index: i + 1, file: name, sha256: sha, unit: 'Jy/beam' });
    }
    expect(record.inputs[1].noise).toMatchObject({ sigma: 0.5, source: 'given' });
    expect(record.inputs[0].noise.source).toBe('estimated');
    // Jy/beam in both: the gain is the ratio of the beam areas in their own pixels, (4.5 / 3)² = 2.25
    expect(record.inputs[1].unitGain).toBeCloseTo(2.25, 6);
    expect(record.inputs[0].fluxScale).toMatchObject({ value: 1, error: 0, fixed: true });
    expect(record.inputs[1].fluxScale.error).toBeGreaterThan(0);
    expect(Math.abs(record.inputs[1].fluxScale.value - 1.07)).toBeLessThan(0.02);
    expect(record.fluxScalePriorWidth).toBe(0.1);
    expect(record.commonGrid).toMatchObject({ width: 96, height: 96, factor: 1 });
    expect(record.catalogue.refinedOn).toBe('reference-image');

    // residual + model = data, image by image
    for (const [i, name] of ['sharp.fits', 'smooth.fits'].entries()) {
      const read = (f: string) => readImage(new Uint8Array(readFileSync(f)), { fileName: f });
      const data = read(join(dir, name));
      const model = read(join(out, `image${i + 1}_model.fits`));
      const residual = read(join(out, `image${i + 1}_residual.fits`));
      let worst = 0;
      for (let j = 0; j < data.data.length; j += 7) {
        worst = Math.max(worst, Math.abs(residual.data[j]! + model.data[j]! - data.data[j]!));
      }
      expect(worst, name).toBeLessThan(1e-4 * 50);
      expect(model.wcs?.isCelestial).toBe(true);
    }
    const csv = readFileSync(join(out, 'catalogue.csv'), 'utf8').split('\n');
    const header = csv.find((line) => !line.startsWith('#'))!;
    expect(header).toMatch(/ra/);
    expect(header).toMatch(/flux_density/);
  }, 180_000);

  it('refuses a per-image option it cannot read, naming it', () => {
    const run = runCli([
      join(dir, 'sharp.fits'),
      join(dir, 'smooth.fits'),
      '--out',
      join(dir, 'x'),
      '--likelihood',
      '2:counts',
    ]);
    expect(run.status).toBe(1);
    expect(run.stderr.trim()).toBe(
      '--likelihood needs gaussian or poisson (or I:KIND for image I), got "counts"',
    );
  }, 60_000);

  it('refuses an image without a celestial WCS with exit code 1 and one line', () => {
    const out = join(dir, 'out-bad');
    const run = runCli([join(dir, 'sharp.fits'), join(dir, 'no-wcs.fits'), '--out', out]);
    expect(run.status).toBe(1);
    const lines = run.stderr.split('\n').filter((l) => l.trim() !== '');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^image 2 \(no-wcs\.fits\) has no celestial WCS/);
    expect(existsSync(join(out, 'run.json'))).toBe(false);
  }, 60_000);
});
