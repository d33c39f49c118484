// @vitest-environment node
import { readdirSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { expectClose as close } from './close-to';
import { readReferenceCatalogue, ReferenceCatalogueError } from '../../server/catalogue/read-reference';
import { sourcesToTable } from '../../server/catalogue/catalogue-table';
import { tableToVotable } from '../../server/catalogue/export-votable';
import { tableToCsv } from '../../server/catalogue/export-csv';
import { sampleProvenance, sampleSources } from './sample-sources';

const fixtureDir = fileURLToPath(new URL('../fixtures/astropy/catalogue/', import.meta.url));
interface FixtureRow {
  id: string;
  ra: number;
  dec: number;
  flux: number | null;
}
const cases = JSON.parse(readFileSync(`${fixtureDir}cases.json`, 'utf8')) as {
  versions: { astropy: string };
  sexagesimal_csv: { file: string; rows: FixtureRow[] };
  votable: { file: string; rows: FixtureRow[] };
};

describe('reference catalogues written by astropy (tests/fixtures/astropy/catalogue/make.py)', () => {
  it('finds the fixture files', () => {
    const files = readdirSync(fixtureDir).filter((name) => /\.(csv|vot)$/.test(name));
    expect(files.sort()).toEqual(['reference-sexagesimal.csv', 'reference.vot']);
    expect(cases.sexagesimal_csv.rows.length).toBe(5);
    expect(cases.votable.rows.length).toBe(3);
    expect(cases.versions.astropy).toBe('5.2.1');
  });

  it('reads sexagesimal RA/Dec (colons, blanks, h m s letters) to the degrees astropy SkyCoord gives', () => {
    const text = readFileSync(`${fixtureDir}${cases.sexagesimal_csv.file}`, 'utf8');
    const catalogue = readReferenceCatalogue(text);
    expect(catalogue.format).toBe('csv');
    expect(catalogue.positions).toBe('sky');
    expect(catalogue.mapping).toEqual({ ra: 'RA_hms', dec: 'Dec_dms', flux: 'S_int', id: 'name' });
    expect(catalogue.rejected).toEqual([]);
    expect(catalogue.entries.length).toBe(cases.sexagesimal_csv.rows.length);
    // Tolerance 1e-9° (3.6 µas): both sides do the same sums in double precision.
    cases.sexagesimal_csv.rows.forEach((expected, i) => {
      const entry = catalogue.entries[i]!;
      expect(entry.id).toBe(expected.id);
      close(entry.ra, expected.ra, 1e-9, `${expected.id} RA`);
      close(entry.dec, expected.dec, 1e-9, `${expected.id} Dec`);
      expect(entry.flux).toBe(expected.flux);
    });
  });

  it('reads a VOTable written by astropy, choosing columns by UCD and treating NaN as null', () => {
    const text = readFileSync(`${fixtureDir}${cases.votable.file}`, 'utf8');
    const catalogue = readReferenceCatalogue(text);
    expect(catalogue.format).toBe('votable');
    expect(catalogue.mapping).toEqual({
      ra: 'alpha_pos',
      dec: 'delta_pos',
      flux: 'brightness',
      id: 'designation_code',
    });
    expect(catalogue.columns.find((column) => column.name === 'brightness')?.unit).toBe('mJy');
    cases.votable.rows.forEach((expected, i) => {
      const entry = catalogue.entries[i]!;
      expect(entry.id).toBe(expected.id);
      expect(entry.ra).toBe(expected.ra);
      expect(entry.dec).toBe(expected.dec);
      expect(entry.flux).toBe(expected.flux);
    });
  });
});

describe('reading our own exports back as a reference', () => {
  const table = sourcesToTable(sampleSources, sampleProvenance);
  it('reads the VOTable export (sky positions, id by UCD) and reports the row without RA/Dec', () => {
    const catalogue = readReferenceCatalogue(tableToVotable(table));
    expect(catalogue.mapping.ra).toBe('ra');
    expect(catalogue.mapping.id).toBe('id');
    expect(catalogue.entries.map((entry) => entry.ra)).toEqual([150.123456789012, 359.99999]);
    expect(catalogue.rejected).toEqual([{ row: 3, line: null, reason: 'RA is empty' }]);
  });

  it('reads the CSV export by pixel position when asked', () => {
    const catalogue = readReferenceCatalogue(tableToCsv(table), { positions: 'pixel' });
    expect(catalogue.positions).toBe('pixel');
    expect(catalogue.entries.map((entry) => [entry.x, entry.y])).toEqual([
      [128.25, 64.0625],
      [1, 512.5],
      [300.75, 2.125],
    ]);
  });
});

describe('column mapping, bad rows and clear errors', () => {
  it('takes an explicit mapping over the guess', () => {
    const csv = 'col_a,col_b,col_c\r\n10.5,-20.25,3\r\n';
    const catalogue = readReferenceCatalogue(csv, { mapping: { ra: 'col_a', dec: 'col_b', flux: 'col_c' } });
    expect(catalogue.entries[0]).toEqual({
      row: 1,
      id: null,
      ra: 10.5,
      dec: -20.25,
      x: null,
      y: null,
      flux: 3,
    });
  });

  it('reports each unreadable row with its number, line and reason, and keeps the rest', () => {
    const csv = [
      '# a comment line',
      'ra,dec,flux',
      '10,20,1', // row 1: fine
      '400,20,1', // row 2: RA out of range
      '10,95,1', // row 3: Dec out of range
      '10,20', // row 4: too few fields
      '10,20,abc', // row 5: flux not a number
      '12:61:00,20,1', // row 6: minutes ≥ 60
      ',20,1', // row 7: empty RA
      '11,21,', // row 8: fine, no flux
    ].join('\r\n');
    const catalogue = readReferenceCatalogue(csv);
    expect(catalogue.entries.map((entry) => entry.row)).toEqual([1, 8]);
    expect(catalogue.entries[1]!.flux).toBeNull();
    expect(catalogue.rejectedCount).toBe(6);
    expect(catalogue.rejected).toEqual([
      { row: 2, line: 4, reason: 'RA 400 is outside 0–360°' },
      { row: 3, line: 5, reason: 'Dec 95 is outside −90° to +90°' },
      { row: 4, line: 6, reason: 'has 2 fields but the header has 3' },
      { row: 5, line: 7, reason: "flux 'abc' is not a number" },
      { row: 6, line: 8, reason: "Cannot read '12:61:00': minutes and seconds must be below 60" },
      { row: 7, line: 9, reason: 'RA is empty' },
    ]);
  });

  it('reads RA in hours when the VOTable unit says h', () => {
    const vot = `<?xml version="1.0"?><VOTABLE version="1.4" xmlns="http://www.ivoa.net/xml/VOTable/v1.3"><RESOURCE><TABLE>
      <FIELD name="RAJ2000" datatype="double" unit="h"/><FIELD name="DEJ2000" datatype="double" unit="deg"/>
      <DATA><TABLEDATA><TR><TD>12.5</TD><TD>-30</TD></TR></TABLEDATA></DATA></TABLE></RESOURCE></VOTABLE>`;
    const catalogue = readReferenceCatalogue(vot);
    expect(catalogue.entries[0]!.ra).toBe(187.5);
  });

  it('throws clear errors for files it cannot use', () => {
    const message = (text: string, options = {}) => {
      try {
        readReferenceCatalogue(text, options);
      } catch (error) {
        expect(error).toBeInstanceOf(ReferenceCatalogueError);
        return (error as Error).message;
      }
      return 'no error';
    };
    expect(message('mag,colour\r\n1,2\r\n')).toBe(
      'No position columns found: looked for RA/Dec (names such as ra, dec, raj2000, dej2000 or UCDs pos.eq.ra, ' +
        'pos.eq.dec) and pixel x/y. Columns are: mag, colour. Choose the position columns.',
    );
    expect(message('ra,mag\r\n1,2\r\n')).toBe(
      'Found an RA column but no Dec column; choose the Dec column. Columns are: ra, mag.',
    );
    expect(message('ra,dec\r\n1,2\r\n', { mapping: { flux: 'S' } })).toBe(
      'Column "S" (chosen for flux) is not in the file; its columns are: ra, dec.',
    );
    expect(message('   ')).toBe('The reference catalogue file is empty.');
    expect(message('<VOTABLE><RESOURCE><TABLE></VOTABLE>')).toMatch(
      /^The VOTable is not well-formed XML \(line 1/,
    );
    expect(
      message(
        '<VOTABLE><RESOURCE><TABLE><FIELD name="ra" datatype="double"/><FIELD name="dec" datatype="double"/><DATA><BINARY2><STREAM encoding="base64">AA==</STREAM></BINARY2></DATA></TABLE></RESOURCE></VOTABLE>',
      ),
    ).toBe(
      'This VOTable stores its rows as BINARY2; only TABLEDATA can be read. Save it with TABLEDATA serialization.',
    );
    expect(message('<html><body/></html>')).toBe(
      'The XML file is not a VOTable: its root element is not VOTABLE.',
    );
  });
});
