// @vitest-environment node
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { expectClose as close } from './close-to';
import {
  crossMatchPixels,
  crossMatchSky,
  defaultMatchRadiusArcsec,
  haversineDistanceDeg,
} from '../../server/catalogue/cross-match';
import type { SkyEntry } from '../../server/catalogue/cross-match';
import { crossMatchToTable } from '../../server/catalogue/match-table';
import { tableToVotable } from '../../server/catalogue/export-votable';
import { tableToCsv } from '../../server/catalogue/export-csv';
import { readBackWithAstropy } from './astropy-read-back';
import { sampleProvenance } from './sample-sources';

const DEG = Math.PI / 180;

describe('haversine great-circle distance (Sinnott 1984, Sky & Telescope 68, 159)', () => {
  it('gives the exact distances of hand-worked cases', () => {
    // Along the equator and along a meridian the distance is the coordinate difference.
    close(haversineDistanceDeg(0, 0, 90, 0), 90, 1e-12, '(0,0)-(90,0)');
    close(haversineDistanceDeg(10, -30, 10, 45), 75, 1e-12, 'meridian');
    // Two points at Dec 60° opposite in RA: the path crosses the pole, 30° + 30° = 60°.
    close(haversineDistanceDeg(0, 60, 180, 60), 60, 1e-12, 'over the pole');
    // Antipodes: 180°.
    close(haversineDistanceDeg(45, 20, 225, -20), 180, 1e-9, 'antipodes');
    // 1 arcsec in RA at Dec 60°: 0.5 arcsec on the sky (cos 60° = 1/2), to first order in the separation.
    close(haversineDistanceDeg(150, 60, 150 + 1 / 3600, 60) * 3600, 0.5, 1e-9, '1 s of RA at Dec 60');
  });

  it('agrees with the spherical law of cosines where that formula is well conditioned', () => {
    // (10°, 20°)-(30°, 40°): cos d = sin 20 sin 40 + cos 20 cos 40 cos 20 (hand formula, independent of haversine).
    const lawOfCosines = Math.acos(
      Math.sin(20 * DEG) * Math.sin(40 * DEG) + Math.cos(20 * DEG) * Math.cos(40 * DEG) * Math.cos(20 * DEG),
    );
    close(haversineDistanceDeg(10, 20, 30, 40), lawOfCosines / DEG, 1e-10, '(10,20)-(30,40)');
    // Worked by hand: cos d = 0.34202·0.64279 + 0.93969·0.76604·0.93969 = 0.21985 + 0.67644 = 0.89629 → d ≈ 26.3°.
    close(haversineDistanceDeg(10, 20, 30, 40), 26.327, 0.01, 'hand value');
  });
});

describe('sky cross-match on a hand-checked example', () => {
  // Reference (theirs), Dec 60° so that cos Dec = 1/2 (1 arcsec of RA = 0.5 arcsec on the sky):
  //   T0 (150°, 60°)   T1 (150° + 4″, 60°) = 2″ east of T0   T2 (150.1°, 60.1°) far away
  // Ours (offsets from T0 on the sky as ΔRA·cosδ, ΔDec in arcsec):
  //   O0 RA +0.6″, Dec +0.8″ → from T0 (0.3, 0.8), sep √0.73 = 0.854″; from T1 (−1.7, 0.8), sep √3.53 = 1.879″
  //   O1 RA +3″            → from T1 (−0.5, 0), sep 0.5″;          from T0 (1.5, 0), sep 1.5″
  //   O2 RA +2″            → 1.0″ from both T0 and T1, both already taken by closer sources → ours-only
  //   O3 (150.5°, 59.5°)   → ours-only
  // Radius 2″. Sorted candidates: O1–T1 0.5, O0–T0 0.854, O2–T0 1.0, O2–T1 1.0, O1–T0 1.5, O0–T1 1.879
  // → greedy pairs O0–T0, O1–T1; ours-only O2, O3; theirs-only T2.
  // Offsets: (0.3, 0.8) and (−0.5, 0): mean (−0.1, 0.4), standard errors 0.4 and 0.4 (std 0.566/√2),
  // RMS ΔRA·cosδ √0.17 = 0.4123, RMS ΔDec √0.32 = 0.5657, RMS separation √((0.73 + 0.25)/2) = 0.7.
  // Fluxes: O0/T0 = 2/1 = 2, O1/T1 = 3/4 = 0.75 → median 1.375, MAD 0.625, robust scatter 1.4826·0.625 = 0.92663.
  const s = 1 / 3600;
  const theirs: SkyEntry[] = [
    { ra: 150, dec: 60, flux: 1 },
    { ra: 150 + 4 * s, dec: 60, flux: 4 },
    { ra: 150.1, dec: 60.1, flux: 1 },
  ];
  const ours: SkyEntry[] = [
    { ra: 150 + 0.6 * s, dec: 60 + 0.8 * s, flux: 2 },
    { ra: 150 + 3 * s, dec: 60, flux: 3 },
    { ra: 150 + 2 * s, dec: 60, flux: 5 },
    { ra: 150.5, dec: 59.5, flux: 5 },
  ];
  const result = crossMatchSky(ours, theirs, { radiusArcsec: 2 });
  // Tolerance 1e-5″: the worked values use cos 60° exactly; the code uses the pair's mean Dec (≤ 0.4″ away,
  // a 2e-6 relative change) and the exact spherical distance.
  const tol = 1e-5;

  it('pairs one-to-one by nearest distance', () => {
    expect(result.pairs.map((pair) => [pair.ours, pair.theirs])).toEqual([
      [0, 0],
      [1, 1],
    ]);
    expect(result.onlyOurs).toEqual([2, 3]);
    expect(result.onlyTheirs).toEqual([2]);
    close(result.pairs[0]!.separation, Math.sqrt(0.73), tol, 'O0-T0 separation');
    close(result.pairs[0]!.offset1, 0.3, tol, 'O0-T0 ΔRA·cosδ');
    close(result.pairs[0]!.offset2, 0.8, tol, 'O0-T0 ΔDec');
    close(result.pairs[1]!.separation, 0.5, tol, 'O1-T1 separation');
    close(result.pairs[1]!.offset1, -0.5, tol, 'O1-T1 ΔRA·cosδ');
  });

  it('reports offset and flux-ratio statistics with their errors', () => {
    close(result.offsets.mean1, -0.1, tol, 'mean ΔRA·cosδ');
    close(result.offsets.mean2, 0.4, tol, 'mean ΔDec');
    close(result.offsets.mean1Err, 0.4, tol, 'error of mean ΔRA·cosδ');
    close(result.offsets.mean2Err, 0.4, tol, 'error of mean ΔDec');
    close(result.offsets.rms1, Math.sqrt(0.17), tol, 'RMS ΔRA·cosδ');
    close(result.offsets.rms2, Math.sqrt(0.32), tol, 'RMS ΔDec');
    close(result.offsets.rmsSeparation, 0.7, tol, 'RMS separation');
    close(result.fluxRatio.median, 1.375, 1e-12, 'median flux ratio');
    close(result.fluxRatio.robustScatter, 1.482602218505602 * 0.625, 1e-12, 'robust scatter');
  });

  it('handles RA wrap-around at 0/360° and the poles', () => {
    // 359.9997° and 0.0003° on the equator are 0.0006° = 2.16″ apart; ours − theirs in RA is −2.16″.
    const wrap = crossMatchSky([{ ra: 359.9997, dec: 0 }], [{ ra: 0.0003, dec: 0 }], { radiusArcsec: 3 });
    close(wrap.pairs[0]?.separation, 2.16, 1e-6, 'wrap separation');
    close(wrap.pairs[0]?.offset1, -2.16, 1e-6, 'wrap ΔRA');
    // Dec 89.9999° on opposite meridians: 2 × 0.0001° = 0.72″ across the pole.
    const pole = crossMatchSky([{ ra: 10, dec: 89.9999 }], [{ ra: 190, dec: 89.9999 }], { radiusArcsec: 1 });
    close(pole.pairs[0]?.separation, 0.72, 1e-6, 'pole separation');
  });

  it('finds the same pairs as a brute-force O(N·M) search on random fields', () => {
    // Naive reference written here: all pairs, haversine, same greedy rule. 600 × 500 sources in a 0.3° field
    // around RA 0° (so the field wraps) at Dec −45°, radius 20″ (crowded enough to have contested pairs).
    let seed = 12345;
    const random = () => (seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648;
    const field = (n: number) =>
      Array.from({ length: n }, () => ({
        ra: (360 + (random() - 0.5) * 0.4) % 360,
        dec: -45 + (random() - 0.5) * 0.3,
      }));
    const a = field(600);
    const b = field(500);
    const radius = 20;
    const all: { i: number; j: number; d: number }[] = [];
    a.forEach((p, i) =>
      b.forEach((q, j) => {
        const d = haversineDistanceDeg(p.ra, p.dec, q.ra, q.dec) * 3600;
        if (d <= radius) all.push({ i, j, d });
      }),
    );
    all.sort((x, y) => x.d - y.d || x.i - y.i || x.j - y.j);
    const usedA = new Set<number>();
    const usedB = new Set<number>();
    const expected: [number, number][] = [];
    for (const { i, j } of all) {
      if (usedA.has(i) || usedB.has(j)) continue;
      usedA.add(i);
      usedB.add(j);
      expected.push([i, j]);
    }
    expected.sort((x, y) => x[0] - y[0]);
    const actual = crossMatchSky(a, b, { radiusArcsec: radius }).pairs.map((pair) => [
      pair.ours,
      pair.theirs,
    ]);
    expect(all.length).toBeGreaterThan(expected.length); // contested pairs exist
    expect(actual).toEqual(expected);
  });

  it('refuses entries without RA/Dec and bad radii with clear messages', () => {
    expect(() => crossMatchSky([{ ra: null, dec: null }], theirs, { radiusArcsec: 2 })).toThrow(
      'Entry 1 of our catalogue has no RA/Dec; match by pixel position instead',
    );
    expect(() => crossMatchSky(ours, theirs, { radiusArcsec: 0 })).toThrow(
      'The match radius must be a positive number of arcsec.',
    );
  });

  it('derives the default radius from the beam (common practice: half the geometric-mean FWHM)', () => {
    close(defaultMatchRadiusArcsec({ majorArcsec: 8, minorArcsec: 2 }), 2, 1e-12, 'radius from 8″×2″ beam');
  });

  it('exports the matched table in VOTable and CSV, read back by astropy', () => {
    const dir = mkdtempSync(join(tmpdir(), 'skysieve-match-'));
    const table = crossMatchToTable(
      result,
      ours.map((entry, i) => ({ ...entry, id: i + 1 })),
      theirs.map((entry, j) => ({ ...entry, id: `T${j}` })),
      sampleProvenance,
      { ourFlux: 'Jy', theirFlux: 'Jy' },
    );
    writeFileSync(join(dir, 'match.vot'), tableToVotable(table));
    writeFileSync(join(dir, 'match.csv'), tableToCsv(table));
    const read = readBackWithAstropy({ votable: join(dir, 'match.vot'), csv: join(dir, 'match.csv') });
    for (const [ucd, ok] of Object.entries(read.votable.ucd_vocabulary_ok)) expect(ok, ucd).toBe(true);
    const kinds = read.votable.rows.map((row: unknown[]) => row[0]);
    expect(kinds).toEqual(['pair', 'pair', 'ours-only', 'ours-only', 'theirs-only']);
    const separationColumn = read.votable.columns.indexOf('separation');
    close(read.votable.rows[1][separationColumn], 0.5, tol, 'separation read back');
    expect(read.votable.rows[4][2]).toBe('T2');
    expect(read.votable.params.radius.value).toBe(2);
    expect(read.csv.rows.length).toBe(5);
  });
});

describe('pixel cross-match (no WCS)', () => {
  it('pairs by Euclidean distance in pixels', () => {
    // Hand example, radius 1.5 px: (10,10)↔(10.6,10.8) 1.0 px; (20,20)↔(21,20) 1.0 px; (30,30) alone; (40,40) alone.
    const result = crossMatchPixels(
      [
        { x: 10.6, y: 10.8 },
        { x: 21, y: 20 },
        { x: 30, y: 30 },
      ],
      [
        { x: 10, y: 10 },
        { x: 20, y: 20 },
        { x: 40, y: 40 },
      ],
      { radiusPixels: 1.5 },
    );
    expect(result.pairs.map((pair) => [pair.ours, pair.theirs])).toEqual([
      [0, 0],
      [1, 1],
    ]);
    close(result.pairs[0]!.separation, 1, 1e-12, 'separation');
    close(result.pairs[0]!.offset1, 0.6, 1e-12, 'Δx');
    close(result.pairs[0]!.offset2, 0.8, 1e-12, 'Δy');
    expect(result.onlyOurs).toEqual([2]);
    expect(result.onlyTheirs).toEqual([2]);
    expect(result.unit).toBe('pixel');
  });
});
