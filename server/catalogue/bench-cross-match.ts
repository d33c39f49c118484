/**
 * Benchmark: sky cross-match of N × N random sources (indexed, dec bands) against the O(N·M) all-pairs search.
 * Run: npx tsx server/catalogue/bench-cross-match.ts   Prints medians of 5 runs (machines are noisy).
 * The field is 1° × 1° around RA 0° at Dec +30° (it wraps in RA), radius 3″.
 */
import { crossMatchSky, haversineDistanceDeg } from './cross-match';
import type { SkyEntry } from './cross-match';
import { seededRandom } from '../engine/random/mulberry32';
import { median, nowMs } from '../bench/stats';

function field(n: number, random: () => number): SkyEntry[] {
  return Array.from({ length: n }, () => ({
    ra: (360 + (random() - 0.5)) % 360,
    dec: 30 + (random() - 0.5),
    flux: 1,
  }));
}

function medianMs(run: () => void, repeats = 5): number {
  const times: number[] = [];
  for (let i = 0; i < repeats; i++) {
    const start = nowMs();
    run();
    times.push(nowMs() - start);
  }
  return median(times);
}

function allPairsCandidates(a: readonly SkyEntry[], b: readonly SkyEntry[], radiusDeg: number): number {
  let count = 0;
  for (const p of a)
    for (const q of b) if (haversineDistanceDeg(p.ra!, p.dec!, q.ra!, q.dec!) <= radiusDeg) count++;
  return count;
}

const random = seededRandom(2026);
for (const n of [2000, 10000]) {
  const a = field(n, random);
  const b = field(n, random);
  const indexed = medianMs(() => crossMatchSky(a, b, { radiusArcsec: 3 }));
  const pairs = crossMatchSky(a, b, { radiusArcsec: 3 }).pairs.length;
  const brute = n <= 2000 ? medianMs(() => allPairsCandidates(a, b, 3 / 3600), 3) : null;
  console.log(
    `${n} × ${n}: indexed ${indexed.toFixed(1)} ms (${pairs} pairs)` +
      (brute === null
        ? ''
        : `, all-pairs candidate search ${brute.toFixed(1)} ms, ratio ${(brute / indexed).toFixed(1)}×`),
  );
}

// Export writers on a 10⁴-source catalogue.
{
  const { sourcesToTable } = await import('./catalogue-table');
  const { tableToCsv } = await import('./export-csv');
  const { tableToVotable } = await import('./export-votable');
  const { tableToFitsBintable } = await import('./export-fits-table');
  const sources = Array.from({ length: 10000 }, (_, i) => ({
    id: i + 1,
    x: random() * 4096,
    y: random() * 4096,
    xErr: 0.1,
    yErr: 0.1,
    ra: random() * 360,
    dec: random() * 180 - 90,
    raErrArcsec: 0.2,
    decErrArcsec: 0.2,
    flux: random(),
    fluxErr: 0.01,
    fluxDensity: random(),
    fluxDensityErr: 0.001,
    snr: 100 * random(),
    significance: null,
    flags: i % 7 === 0 ? (['blended'] as const).slice() : [],
  }));
  const table = sourcesToTable(sources, {
    imageName: 'bench.fits',
    imageSha256: '0'.repeat(64),
    imageUnit: 'Jy/beam',
    beam: null,
    settingsDigest: 'bench',
    softwareVersion: 'bench',
    createdAt: new Date().toISOString(),
  });
  for (const [name, write] of [
    ['CSV', () => tableToCsv(table)],
    ['VOTable', () => tableToVotable(table)],
    ['FITS', () => tableToFitsBintable(table)],
  ] as const) {
    console.log(`export 10000 sources as ${name}: ${medianMs(write, 3).toFixed(0)} ms`);
  }
}
