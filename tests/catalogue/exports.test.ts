// @vitest-environment node
/**
 * Every export is read back by an outside reader: astropy 5.2 (Debian's python3-astropy) through the committed
 * script tests/fixtures/astropy/catalogue/read_back.py. CSV: astropy.io.ascii (format 'csv'). VOTable:
 * astropy.io.votable.parse with verify='exception' and warnings turned into errors, plus the UCD1+ controlled
 * vocabulary check; the XSD check against astropy's bundled VOTable 1.4 schema runs only when xmllint is on PATH
 * (it is not on this machine; the test prints which). FITS: astropy.io.fits with HDUList.verify('exception').
 *
 * Tolerance: 0 for every number. Writers print the shortest decimal that round-trips to the same IEEE double
 * (CSV, VOTable) or write the double's big-endian bytes (FITS), so astropy must return the identical value.
 */
import { existsSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { sourceColumns, sourcesToTable } from '../../server/catalogue/catalogue-table';
import type { CatalogueTable, CellValue } from '../../server/catalogue/catalogue-table';
import { csvSidecar, tableToCsv } from '../../server/catalogue/export-csv';
import { tableToVotable } from '../../server/catalogue/export-votable';
import { tableToFitsBintable } from '../../server/catalogue/export-fits-table';
import { parseCatalogueFormats, writeCatalogueFiles } from '../../server/catalogue/write-catalogue-files';
import { readBackWithAstropy } from './astropy-read-back';
import { sampleProvenance, sampleSources } from './sample-sources';

const table = sourcesToTable(sampleSources, sampleProvenance);
const dir = mkdtempSync(join(tmpdir(), 'skysieve-catalogue-'));

/** Expected value as astropy reports it: nulls and NaN → null, empty text → null (masked) or ''. */
function sameCell(actual: unknown, expected: CellValue, where: string) {
  const message = `${where}: expected ${JSON.stringify(expected)}, astropy read ${JSON.stringify(actual)}, tolerance 0`;
  if (expected === null || expected === '') {
    expect(actual === null || actual === '', message).toBe(true);
  } else {
    expect(actual, message).toBe(expected);
  }
}

function compareRows(readRows: unknown[][], expected: CatalogueTable, reader: string) {
  expect(readRows.length, `${reader}: row count`).toBe(expected.rows.length);
  expected.rows.forEach((row, r) => {
    row.forEach((value, c) =>
      sameCell(readRows[r]![c], value, `${reader} row ${r + 1} ${expected.columns[c]!.name}`),
    );
  });
}

describe('CSV export (RFC 4180) read back by astropy.io.ascii', () => {
  it('has the header row and every value, exactly', () => {
    const path = join(dir, 'catalogue.csv');
    const csv = tableToCsv(table);
    writeFileSync(path, csv);
    // RFC 4180 §2: records end with CRLF; a field holding a quote is quoted with the quote doubled.
    expect(csv.split('\r\n')[0]).toBe(
      'id,x,y,x_err,y_err,ra,dec,ra_err,dec_err,flux,flux_err,flux_density,flux_density_err,snr,significance,flags',
    );
    expect(csv.endsWith('\r\n')).toBe(true);
    const read = readBackWithAstropy({ csv: path }).csv;
    expect(read.columns).toEqual(table.columns.map((column) => column.name));
    compareRows(read.rows, table, 'csv');
  });

  it('quotes commas, quotes and line breaks so they survive (RFC 4180 §2.6, §2.7)', () => {
    const awkward: CatalogueTable = {
      ...table,
      columns: [
        { name: 'id', datatype: 'int', unit: '', ucd: 'meta.id;meta.main', description: 'id' },
        { name: 'note', datatype: 'char', unit: '', ucd: 'meta.note', description: 'note' },
      ],
      rows: [
        [1, 'a, b'],
        [2, 'say "hi"'],
        [3, 'two\nlines'],
      ],
    };
    const path = join(dir, 'awkward.csv');
    writeFileSync(path, tableToCsv(awkward));
    expect(readFileSync(path, 'utf8')).toContain('"say ""hi"""');
    compareRows(readBackWithAstropy({ csv: path }).csv.rows, awkward, 'csv');
  });

  it('writes a JSON sidecar with units, provenance and the caution', () => {
    const sidecar = csvSidecar(table, 'catalogue.csv');
    expect(sidecar.columns.find((column) => column.name === 'flux_density')?.unit).toBe('Jy');
    expect(sidecar.columns.find((column) => column.name === 'flux')?.unit).toBe('Jy.pixel/beam');
    expect(sidecar.columns.find((column) => column.name === 'ra')?.unit).toBe('deg');
    expect(sidecar.provenance.imageSha256).toBe(sampleProvenance.imageSha256);
    expect(sidecar.caution).toMatch(/model-dependent/);
    expect(sidecar.caution).toMatch(/must be measured/);
    expect(sidecar.rows).toBe(3);
  });

  it('refuses a row that does not fit the columns, naming it', () => {
    const bad: CatalogueTable = { ...table, rows: [[1, 2]] };
    expect(() => tableToCsv(bad)).toThrow('Row 1 has 2 values but the table has 16 columns.');
    const infinite: CatalogueTable = {
      ...table,
      rows: [table.rows[0]!.map((v, i) => (i === 9 ? Infinity : v))],
    };
    expect(() => tableToCsv(infinite)).toThrow('Row 1, column flux: Infinity is not a finite number.');
  });
});

describe('VOTable 1.4 export read back by astropy.io.votable (verify="exception")', () => {
  const path = join(dir, 'catalogue.vot');
  writeFileSync(path, tableToVotable(table));
  const read = readBackWithAstropy({ votable: path }).votable;

  it('is a version 1.4 document astropy accepts without any warning', () => {
    expect(read.version).toBe('1.4');
    console.info(`VOTable XSD check: ${read.schema}`);
    expect(read.schema === 'valid' || String(read.schema).startsWith('not run')).toBe(true);
    expect(readFileSync(path, 'utf8')).toContain(
      'xmlns="http://www.ivoa.net/xml/VOTable/v1.3" version="1.4"',
    );
  });

  it('declares datatype, unit and a controlled-vocabulary UCD on every FIELD', () => {
    const columns = sourceColumns(sampleProvenance.imageUnit);
    expect(read.fields.map((field: { name: string }) => field.name)).toEqual(
      columns.map((column) => column.name),
    );
    for (const [i, column] of columns.entries()) {
      const field = read.fields[i];
      expect(field.datatype, column.name).toBe(column.datatype);
      expect(field.ucd, column.name).toBe(column.ucd);
      // astropy prints a parsed unit in its own canonical order, e.g. Jy.pixel/beam → beam**-1.Jy.pixel.
      const canonical = column.unit.replace(/^(\w+)\.pixel\/beam$/, 'beam**-1.$1.pixel');
      if (column.unit !== '') expect(field.unit, column.name).toBe(canonical);
    }
    // UCD1+ words checked against the vocabulary file shipped with astropy (ucd1p-words.txt).
    for (const [ucd, ok] of Object.entries(read.ucd_vocabulary_ok)) expect(ok, ucd).toBe(true);
    expect(read.fields.find((f: { name: string }) => f.name === 'ra').ucd).toBe('pos.eq.ra;meta.main');
  });

  it('carries the provenance as PARAMs and the caution as the DESCRIPTION', () => {
    expect(read.params.image_name.value).toBe(sampleProvenance.imageName);
    expect(read.params.image_sha256.value).toBe(sampleProvenance.imageSha256);
    expect(read.params.beam_major.value).toBe(6.5);
    expect(read.params.beam_major.unit).toBe('arcsec');
    expect(read.params.settings_digest.value).toBe(sampleProvenance.settingsDigest);
    expect(read.params.software_version.value).toBe('0.1.0');
    expect(read.description).toMatch(/model-dependent/);
  });

  it('returns every value exactly, nulls as empty cells (NaN for double)', () => {
    compareRows(read.rows, table, 'votable');
  });
});

describe('FITS BINTABLE export read back by astropy.io.fits (verify("exception")) and astropy.table', () => {
  const path = join(dir, 'catalogue.fits');
  writeFileSync(path, tableToFitsBintable(table));
  const read = readBackWithAstropy({ fits: path }).fits;

  it('has an empty primary HDU and a BINTABLE named CATALOGUE with the mandatory cards (Standard 4.0 §7.3.1)', () => {
    expect(read.hdus).toBe(2);
    expect(read.file_size % 2880).toBe(0);
    expect(read.headers[0].NAXIS).toBe(0);
    expect(read.headers[0].EXTEND).toBe(true);
    const header = read.headers[1];
    expect(header.XTENSION).toBe('BINTABLE');
    expect(header.EXTNAME).toBe('CATALOGUE');
    // Row width: 1 J (4 bytes) + 14 D (8 bytes) + flags as 22A ('edge|near-mask|blended' is 22 characters).
    expect(header.NAXIS1).toBe(4 + 14 * 8 + 22);
    expect(header.NAXIS2).toBe(3);
    expect(header.PCOUNT).toBe(0);
    expect(header.GCOUNT).toBe(1);
    expect(header.TFIELDS).toBe(16);
    expect(read.columns.map((column: { format: string }) => column.format)).toEqual([
      'J',
      ...Array.from({ length: 14 }, () => 'D'),
      '22A',
    ]);
    expect(read.columns.find((column: { name: string }) => column.name === 'flux_density').unit).toBe('Jy');
    expect(read.columns.find((column: { name: string }) => column.name === 'ra').unit).toBe('deg');
  });

  it('carries provenance cards', () => {
    const header = read.headers[1];
    expect(header.IMAGE).toBe(sampleProvenance.imageName);
    expect(header.IMGSHA).toBe(sampleProvenance.imageSha256);
    expect(header.BMAJ).toBe(6.5 / 3600);
    expect(header.SETDIGST).toBe(sampleProvenance.settingsDigest);
    expect(header.SKYSVER).toBe('0.1.0');
  });

  it('returns every value exactly (nulls as NaN)', () => {
    expect(read.names).toEqual(table.columns.map((column) => column.name));
    compareRows(read.rows, table, 'fits');
  });

  it('writes nullable integers with TNULLn and an empty table', () => {
    const withNulls: CatalogueTable = {
      ...table,
      columns: [
        { name: 'n', datatype: 'int', unit: '', ucd: 'meta.number', description: 'n', nullable: true },
      ],
      rows: [[5], [null], [-7]],
    };
    const nullsPath = join(dir, 'nulls.fits');
    writeFileSync(nullsPath, tableToFitsBintable(withNulls));
    const empty: CatalogueTable = { ...table, rows: [] };
    const emptyPath = join(dir, 'empty.fits');
    writeFileSync(emptyPath, tableToFitsBintable(empty));
    const back = readBackWithAstropy({ fits: nullsPath }).fits;
    expect(back.columns[0].null).toBe(-2147483648);
    expect(back.rows).toEqual([[5], [null], [-7]]);
    expect(readBackWithAstropy({ fits: emptyPath }).fits.rows).toEqual([]);
  });
});

describe('writeCatalogueFiles', () => {
  it('writes catalogue.csv + catalogue.json, catalogue.vot and catalogue.fits that astropy reads', async () => {
    const out = join(dir, 'run-out');
    const written = await writeCatalogueFiles(
      out,
      parseCatalogueFormats('csv, votable,fits'),
      sampleSources,
      sampleProvenance,
    );
    expect(written.map((path) => path.slice(out.length + 1))).toEqual([
      'catalogue.csv',
      'catalogue.json',
      'catalogue.vot',
      'catalogue.fits',
    ]);
    expect(readdirSync(out).sort()).toEqual([
      'catalogue.csv',
      'catalogue.fits',
      'catalogue.json',
      'catalogue.vot',
    ]);
    const read = readBackWithAstropy({
      csv: join(out, 'catalogue.csv'),
      votable: join(out, 'catalogue.vot'),
      fits: join(out, 'catalogue.fits'),
    });
    for (const reader of ['csv', 'votable', 'fits'] as const) compareRows(read[reader].rows, table, reader);
    expect(JSON.parse(readFileSync(join(out, 'catalogue.json'), 'utf8')).provenance.imageName).toBe(
      sampleProvenance.imageName,
    );
  });

  it('refuses unknown formats and bad rows before writing anything', async () => {
    expect(() => parseCatalogueFormats('csv,xlsx')).toThrow(
      'Unknown catalogue format "xlsx"; use csv, votable or fits.',
    );
    const out = join(dir, 'bad-out');
    const broken = [{ ...sampleSources[0]!, id: 1.5 }];
    await expect(writeCatalogueFiles(out, ['csv', 'fits'], broken, sampleProvenance)).rejects.toThrow(
      'Row 1, column id: 1.5 is not a 32-bit integer.',
    );
    expect(existsSync(out)).toBe(false);
  });
});

describe('equatorial frame', () => {
  it('writes a COOSYS the RA/Dec FIELDs refer to (VOTable 1.4 §3.1) and RADESYS/EQUINOX in FITS', () => {
    const path = join(dir, 'frame.vot');
    writeFileSync(path, tableToVotable(table));
    const fitsPath = join(dir, 'frame.fits');
    writeFileSync(fitsPath, tableToFitsBintable(table));
    const read = readBackWithAstropy({ votable: path, fits: fitsPath });
    expect(read.votable.coosys).toEqual([{ ID: 'equatorial_frame', system: 'eq_FK5', equinox: 'J2000.0' }]);
    const refs = Object.fromEntries(
      read.votable.fields.map((field: { name: string; ref: string | null }) => [field.name, field.ref]),
    );
    expect(refs.ra).toBe('equatorial_frame');
    expect(refs.dec).toBe('equatorial_frame');
    expect(refs.flux).toBeNull();
    expect(read.fits.headers[1].RADESYS).toBe('FK5');
    expect(read.fits.headers[1].EQUINOX).toBe(2000);
  });
});
