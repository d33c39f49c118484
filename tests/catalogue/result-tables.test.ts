// @vitest-environment node
/**
 * Completeness, number-count and false-source tables go through the same writers as the catalogue; astropy
 * (read_back.py: votable.parse verify='exception', UCD1+ vocabulary check, fits verify('exception')) reads them.
 */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { completenessByLevel, falseSourceRate } from '../../server/catalogue/completeness';
import type { InjectionOutcome } from '../../server/catalogue/completeness';
import { tableToFitsBintable } from '../../server/catalogue/export-fits-table';
import { tableToVotable } from '../../server/catalogue/export-votable';
import { numberCounts } from '../../server/catalogue/number-counts';
import {
  completenessToTable,
  falseSourcesToTable,
  numberCountsToTable,
} from '../../server/catalogue/result-tables';
import type { CatalogueTable } from '../../server/catalogue/catalogue-table';
import { readBackWithAstropy } from './astropy-read-back';
import { sampleProvenance } from './sample-sources';

const dir = mkdtempSync(join(tmpdir(), 'skysieve-results-'));

function readBoth(table: CatalogueTable, name: string) {
  writeFileSync(join(dir, `${name}.vot`), tableToVotable(table));
  writeFileSync(join(dir, `${name}.fits`), tableToFitsBintable(table));
  return readBackWithAstropy({ votable: join(dir, `${name}.vot`), fits: join(dir, `${name}.fits`) });
}

describe('result tables read back by astropy', () => {
  it('completeness per level', () => {
    const outcomes: InjectionOutcome[] = [0, 1, 2, 3].map((i) => ({
      truth: { x: i, y: 0, flux: 2, level: 0 },
      recovered: i < 3,
      measuredFlux: i < 3 ? 2 + 0.1 * i : null,
      measuredFluxErr: i < 3 ? 0.2 : null,
      separationPixels: i < 3 ? 0.3 : null,
    }));
    const results = completenessByLevel([2], outcomes);
    const read = readBoth(completenessToTable(results, sampleProvenance, 'Jy'), 'completeness');
    for (const [ucd, ok] of Object.entries(read.votable.ucd_vocabulary_ok)) expect(ok, ucd).toBe(true);
    const c = read.votable.columns.indexOf('completeness');
    expect(read.votable.rows[0][c]).toBe(0.75);
    expect(read.fits.rows[0][c]).toBe(0.75);
    expect(read.votable.description).toMatch(/model-dependent/);
  });

  it('number counts, with nulls where no correction applies', () => {
    const bins = numberCounts([1.2, 1.5, 3], {
      binEdges: [1, 2, 4],
      areaSr: 0.01,
      completeness: { flux: [1.5, 4], completeness: [0.8, 1] },
    });
    const read = readBoth(numberCountsToTable(bins, sampleProvenance, 'Jy'), 'counts');
    for (const [ucd, ok] of Object.entries(read.votable.ucd_vocabulary_ok)) expect(ok, ucd).toBe(true);
    const corrected = read.votable.columns.indexOf('dnds_sr_corrected');
    expect(read.votable.rows[0][corrected]).toBeNull(); // bin 1 centre √2 < 1.5: completeness not measured
    expect(read.fits.rows[1][corrected]).toBe(bins[1]!.corrected!.perSr.value);
    const unit = read.votable.fields.find((field: { name: string }) => field.name === 'dnds_sr').unit;
    expect(unit).toBe('Jy**-1.sr**-1'); // astropy's canonical spelling of sr-1/(Jy)
  });

  it('false-source rate', () => {
    const { bins } = falseSourceRate([{ x: 1, y: 1, snr: 4 }], {
      snrEdges: [3, 5],
      area: 2,
      realSnr: [4, 4.5],
    });
    const read = readBoth(falseSourcesToTable(bins, sampleProvenance, 'deg-2'), 'false');
    for (const [ucd, ok] of Object.entries(read.votable.ucd_vocabulary_ok)) expect(ok, ucd).toBe(true);
    expect(read.fits.rows[0][read.fits.names.indexOf('rate')]).toBe(0.5);
    expect(read.fits.rows[0][read.fits.names.indexOf('reliability')]).toBe(0.5);
  });
});
