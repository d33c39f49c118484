// @vitest-environment node
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import type { CatalogueSource } from '../../shared/catalogue';
import { matchRuns, matchToReference, referenceTableEntries } from '../../server/catalogue/match-reference';
import { crossMatchToTable } from '../../server/catalogue/match-table';
import { readReferenceCatalogue } from '../../server/catalogue/read-reference';
import { expectClose } from './close-to';
import { sampleProvenance, sampleSources } from './sample-sources';

const fixture = fileURLToPath(new URL('../fixtures/astropy/catalogue/reference.vot', import.meta.url));

/** A source at (ra, dec) with the rest of the fields from the first sample source. */
const at = (id: number, ra: number | null, dec: number | null, flux = 10): CatalogueSource => ({
  ...sampleSources[0]!,
  id,
  ra,
  dec,
  flux,
});

describe('matching a run against a reference catalogue', () => {
  // The astropy-written reference (make.py) has AWS J183656+384701 at (279.2347333, 38.7836889), flux 12.5, and
  // AWS J000000-003000 at (0.0004167, −0.5001389), flux 0.75. Ours: one 1″ north of the first (flux 10) and one
  // 1″ east of the third in RA·cos Dec (RA + 1″/cos(−0.5°), flux 0.75), and one far away.
  const reference = readReferenceCatalogue(readFileSync(fixture, 'utf8'));
  const s = 1 / 3600;
  const ours = [
    at(1, 279.2347333, 38.7836889 + s, 10),
    at(2, 0.0004167 + s / Math.cos((-0.5001389 * Math.PI) / 180), -0.5001389, 0.75),
    at(3, 100, 20),
  ];

  it('uses the beam for the default radius and pairs the hand-placed sources', () => {
    // Beam 6.5″ × 5.25″ → radius √(6.5·5.25)/2 = 2.921″ (common practice: half the geometric-mean FWHM).
    const result = matchToReference(ours, reference, { beam: sampleProvenance.beam });
    expectClose(result.radius, Math.sqrt(6.5 * 5.25) / 2, 1e-12, 'radius');
    expect(result.pairs.map((pair) => [pair.ours, pair.theirs])).toEqual([
      [0, 0],
      [1, 2],
    ]);
    expectClose(result.pairs[0]!.offset2, 1, 1e-6, 'ΔDec of the first pair');
    expectClose(result.pairs[1]!.offset1, 1, 1e-6, 'ΔRA·cosδ of the second pair');
    expectClose(result.pairs[0]!.fluxRatio, 10 / 12.5, 1e-12, 'flux ratio');
    expect(result.onlyOurs).toEqual([2]);
    expect(result.onlyTheirs).toEqual([1]);
    const table = crossMatchToTable(result, ours, referenceTableEntries(reference), sampleProvenance);
    expect(table.rows[0]![2]).toBe('AWS J183656+384701');
  });

  it('asks for a radius when there is no beam, and refuses sky matching without our RA/Dec', () => {
    expect(() => matchToReference(ours, reference)).toThrow(
      'Give a match radius in arcsec: the image has no beam to derive one from.',
    );
    expect(() => matchToReference([at(1, null, null)], reference, { radiusArcsec: 2 })).toThrow(
      /^The reference has RA\/Dec but some of our sources have none/,
    );
  });

  it('matches two runs by pixel position when one has no WCS', () => {
    const a = [{ ...at(1, null, null), x: 10, y: 10 }];
    const b = [{ ...at(1, 1, 1), x: 10.5, y: 10 }];
    const result = matchRuns(a, b, { radiusPixels: 1 });
    expect(result.mode).toBe('pixel');
    expectClose(result.pairs[0]?.separation, 0.5, 1e-12, 'pixel separation');
    expect(() => matchRuns(a, b)).toThrow('Give a match radius in pixels for matching by pixel position.');
  });
});
