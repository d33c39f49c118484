/**
 * Reads a reference catalogue (CSV or VOTable TABLEDATA) for cross-matching.
 *
 * - CSV: RFC 4180 with a header row (csv-parse); lines starting with '#' are comments; a UTF-8 BOM is dropped.
 * - VOTable (1.1–1.4, any namespace prefix): the first TABLE with TABLEDATA rows (fast-xml-parser); FIELD names,
 *   units and UCDs are used for the column guess; VALUES null sentinels become empty cells. BINARY, BINARY2 and
 *   FITS serializations are refused with a message saying so.
 * - Positions: RA/Dec in degrees, or sexagesimal ('hh:mm:ss.s' / '±dd:mm:ss.s', blank-separated, or with h m s /
 *   d ′ ″ letters; parsed by the engine's sexagesimal reader), numeric RA in hours when the column's unit says
 *   so (VOTable unit 'h'); or pixel positions x/y (FITS 1-based) when there is no RA/Dec.
 * - Columns are guessed from UCDs (VOTable; `pos.eq.ra;meta.main` first) and then from common names; an explicit
 *   mapping overrides the guess. Rows that cannot be read are reported (row number, line for CSV, reason) and
 *   left out; the rest of the file is kept. Problems with the file as a whole (not CSV/VOTable, no position
 *   columns, a mapped column that is not there) throw a {@link ReferenceCatalogueError} with a message for a person.
 */
import { parse as parseCsv } from 'csv-parse/sync';
import { XMLParser, XMLValidator } from 'fast-xml-parser';
import { parseDec, parseRa } from '../engine/wcs/sexagesimal';

export class ReferenceCatalogueError extends Error {
  override name = 'ReferenceCatalogueError';
}

export type ReferenceFormat = 'csv' | 'votable';

export interface ColumnMapping {
  ra?: string;
  dec?: string;
  x?: string;
  y?: string;
  flux?: string;
  id?: string;
}

export interface ReferenceColumn {
  name: string;
  unit: string | null;
  ucd: string | null;
}

export interface ReferenceEntry {
  /** 1-based data row number in the file (header not counted). */
  row: number;
  id: string | null;
  ra: number | null;
  dec: number | null;
  x: number | null;
  y: number | null;
  flux: number | null;
}

export interface RejectedRow {
  row: number;
  /** CSV only: the file line the row starts on. */
  line: number | null;
  reason: string;
}

export interface ReferenceCatalogue {
  format: ReferenceFormat;
  positions: 'sky' | 'pixel';
  columns: ReferenceColumn[];
  /** The mapping used (guessed or given). */
  mapping: ColumnMapping;
  entries: ReferenceEntry[];
  /** The rows left out, with reasons (at most `maxRejectedListed` listed). */
  rejected: RejectedRow[];
  /** How many rows were left out in all. */
  rejectedCount: number;
  rowsRead: number;
}

export interface ReadReferenceOptions {
  /** @default detected from the content ('<' first → VOTable) */
  format?: ReferenceFormat;
  /** Explicit column names; fields left out are guessed. */
  mapping?: ColumnMapping;
  /** Force sky or pixel positions when both are present. @default sky when RA/Dec exist */
  positions?: 'sky' | 'pixel';
  /** Most rejected rows listed one by one (the count is always exact). @default 1000 */
  maxRejectedListed?: number;
}

interface RawTable {
  columns: ReferenceColumn[];
  /** Cells as text; null for a null cell. */
  rows: { cells: (string | null)[]; line: number | null; fieldCount: number }[];
}

/** Empty cells and NaN (VOTable 1.4 §6.1: NaN is the null of floating-point fields) are null. */
function isNullText(cell: string): boolean {
  return cell === '' || /^nan$/i.test(cell);
}

// ---------------------------------------------------------------------------------------------- CSV

function readCsvTable(text: string): RawTable {
  let records: { record: string[]; info: { lines: number } }[];
  try {
    records = parseCsv(text, {
      bom: true,
      comment: '#',
      comment_no_infix: true,
      skip_empty_lines: true,
      relax_column_count: true,
      relax_quotes: false,
      trim: true,
      info: true,
    }) as unknown as { record: string[]; info: { lines: number } }[];
  } catch (error) {
    throw new ReferenceCatalogueError(`The CSV file could not be read: ${(error as Error).message}`);
  }
  const [header, ...data] = records;
  if (!header)
    throw new ReferenceCatalogueError('The CSV file is empty: expected a header row with column names.');
  const names = header.record.map((name) => name.trim());
  if (names.some((name) => name === '')) {
    throw new ReferenceCatalogueError('The CSV header has an empty column name; every column needs a name.');
  }
  return {
    columns: names.map((name) => ({ name, unit: null, ucd: null })),
    rows: data.map(({ record, info }) => ({
      cells: names.map((_, index) => {
        const cell = record[index];
        return cell === undefined || isNullText(cell) ? null : cell;
      }),
      // info.lines is the line the record ends on; a record spans one line unless a quoted field has newlines.
      line: info.lines,
      fieldCount: record.length,
    })),
  };
}

// ---------------------------------------------------------------------------------------------- VOTable

type XmlNode = Record<string, unknown>;

const ARRAY_ELEMENTS = new Set(['RESOURCE', 'TABLE', 'FIELD', 'TR', 'TD', 'PARAM', 'INFO', 'GROUP']);

function asArray(value: unknown): XmlNode[] {
  if (value === undefined || value === null) return [];
  return (Array.isArray(value) ? value : [value]) as XmlNode[];
}

function firstTable(resources: XmlNode[]): XmlNode | null {
  for (const resource of resources) {
    const tables = asArray(resource.TABLE);
    if (tables[0]) return tables[0];
    const nested = firstTable(asArray(resource.RESOURCE));
    if (nested) return nested;
  }
  return null;
}

function textOf(value: unknown): string {
  if (value === undefined || value === null) return '';
  if (typeof value === 'string') return value;
  if (typeof value === 'number' || typeof value === 'boolean') return String(value);
  const text = (value as XmlNode)['#text'];
  return text === undefined ? '' : String(text);
}

function readVotableTable(text: string): RawTable {
  const valid = XMLValidator.validate(text);
  if (valid !== true) {
    throw new ReferenceCatalogueError(
      `The VOTable is not well-formed XML (line ${valid.err.line}, column ${valid.err.col}): ${valid.err.msg}`,
    );
  }
  const parser = new XMLParser({
    ignoreAttributes: false,
    attributeNamePrefix: '@_',
    removeNSPrefix: true,
    parseTagValue: false,
    parseAttributeValue: false,
    trimValues: true,
    isArray: (name) => ARRAY_ELEMENTS.has(name),
  });
  const document = parser.parse(text) as XmlNode;
  const votable = document.VOTABLE as XmlNode | undefined;
  if (!votable)
    throw new ReferenceCatalogueError('The XML file is not a VOTable: its root element is not VOTABLE.');
  const table = firstTable(asArray(votable.RESOURCE));
  if (!table) throw new ReferenceCatalogueError('The VOTable has no TABLE.');
  const fields = asArray(table.FIELD);
  if (fields.length === 0) throw new ReferenceCatalogueError('The VOTable TABLE has no FIELD elements.');
  const columns = fields.map((field, index) => ({
    name: String(field['@_name'] ?? field['@_ID'] ?? `column_${index + 1}`),
    unit: field['@_unit'] === undefined ? null : String(field['@_unit']),
    ucd: field['@_ucd'] === undefined ? null : String(field['@_ucd']),
  }));
  const nulls = fields.map((field) => {
    const values = asArray(field.VALUES)[0];
    return values && values['@_null'] !== undefined ? String(values['@_null']) : null;
  });
  const data = (table.DATA ?? {}) as XmlNode;
  for (const serialization of ['BINARY', 'BINARY2', 'FITS']) {
    if (data[serialization] !== undefined) {
      throw new ReferenceCatalogueError(
        `This VOTable stores its rows as ${serialization}; only TABLEDATA can be read. Save it with TABLEDATA serialization.`,
      );
    }
  }
  const tableData = data.TABLEDATA as XmlNode | string | undefined;
  const rows = asArray(typeof tableData === 'object' ? tableData.TR : undefined).map((tr) => {
    const tds = asArray(tr.TD);
    return {
      cells: columns.map((_, index) => {
        const cell = textOf(tds[index]).trim();
        return isNullText(cell) || cell === nulls[index] ? null : cell;
      }),
      line: null,
      fieldCount: tds.length,
    };
  });
  return { columns, rows };
}

// ---------------------------------------------------------------------------------------------- columns

const NAME_GUESSES: Record<keyof ColumnMapping, string[]> = {
  ra: [
    'ra',
    'raj2000',
    'ra_j2000',
    'ra_icrs',
    'radeg',
    'ra_deg',
    'ra_hms',
    'rahms',
    'alpha',
    'alpha_j2000',
    'right_ascension',
  ],
  dec: [
    'dec',
    'de',
    'decl',
    'dej2000',
    'dec_j2000',
    'de_icrs',
    'dec_icrs',
    'decdeg',
    'dec_deg',
    'dec_dms',
    'decdms',
    'delta',
    'delta_j2000',
    'declination',
  ],
  x: ['x', 'xpix', 'x_pix', 'pix_x', 'pixel_x', 'x_pixel', 'xc', 'x_centre', 'x_center'],
  y: ['y', 'ypix', 'y_pix', 'pix_y', 'pixel_y', 'y_pixel', 'yc', 'y_centre', 'y_center'],
  flux: [
    'flux',
    'total_flux',
    'flux_total',
    'int_flux',
    'flux_int',
    's_int',
    'sint',
    'flux_density',
    'fluxdensity',
    's',
    'f',
    'peak_flux',
    'flux_peak',
  ],
  id: ['id', 'name', 'source_id', 'sourceid', 'src_id', 'source', 'designation', 'objid', 'object'],
};

const UCD_GUESSES: Partial<Record<keyof ColumnMapping, (ucd: string) => number>> = {
  // Higher score wins; 0 = no match.
  ra: (ucd) => (ucd === 'pos.eq.ra;meta.main' ? 2 : ucd.split(';')[0] === 'pos.eq.ra' ? 1 : 0),
  dec: (ucd) => (ucd === 'pos.eq.dec;meta.main' ? 2 : ucd.split(';')[0] === 'pos.eq.dec' ? 1 : 0),
  x: (ucd) => (ucd.split(';')[0] === 'pos.cartesian.x' ? 1 : 0),
  y: (ucd) => (ucd.split(';')[0] === 'pos.cartesian.y' ? 1 : 0),
  flux: (ucd) =>
    ucd.includes('stat.')
      ? 0
      : ucd.startsWith('phot.flux;meta.main')
        ? 3
        : ucd.startsWith('phot.flux')
          ? 2
          : 0,
  id: (ucd) => (ucd === 'meta.id;meta.main' ? 2 : ucd.split(';')[0] === 'meta.id' ? 1 : 0),
};

const normalise = (name: string) =>
  name
    .trim()
    .toLowerCase()
    .replace(/[^a-z0-9]+/g, '_')
    .replace(/^_|_$/g, '');

/** Guesses which column holds each quantity, from UCDs first and then from common names. */
export function guessColumnMapping(columns: readonly ReferenceColumn[]): ColumnMapping {
  const mapping: ColumnMapping = {};
  const taken = new Set<string>();
  for (const key of Object.keys(NAME_GUESSES) as (keyof ColumnMapping)[]) {
    let best: string | undefined;
    const score = UCD_GUESSES[key];
    if (score) {
      let bestScore = 0;
      for (const column of columns) {
        const s = column.ucd ? score(column.ucd) : 0;
        if (s > bestScore && !taken.has(column.name)) {
          bestScore = s;
          best = column.name;
        }
      }
    }
    if (best === undefined) {
      for (const candidate of NAME_GUESSES[key]) {
        const column = columns.find((c) => normalise(c.name) === candidate && !taken.has(c.name));
        if (column) {
          best = column.name;
          break;
        }
      }
    }
    if (best !== undefined) {
      mapping[key] = best;
      taken.add(best);
    }
  }
  return mapping;
}

// ---------------------------------------------------------------------------------------------- values

const SEXAGESIMAL = /[:hdms°'"′″]|\d\s+\d/i;

type AngleUnit = 'deg' | 'hour' | 'rad' | 'sexagesimal';

function angleUnit(unit: string | null, what: string): AngleUnit {
  if (unit === null) return 'deg';
  const u = unit.trim().toLowerCase().replace(/^"|"$/g, '');
  if (u === '' || u === 'deg' || u === 'degree' || u === 'degrees') return 'deg';
  if (u === 'h' || u === 'hour' || u === 'hours' || u === 'hourangle') return 'hour';
  if (u === 'rad' || u === 'radian' || u === 'radians') return 'rad';
  if (u.includes(':') || u === 'hms' || u === 'dms') return 'sexagesimal';
  throw new ReferenceCatalogueError(
    `The ${what} column's unit "${unit}" is not understood; use deg, h or rad.`,
  );
}

function readNumber(text: string, what: string): number {
  const value = Number(text);
  if (text.trim() === '' || !Number.isFinite(value))
    throw new RangeError(`${what} '${text}' is not a number`);
  return value;
}

function readRa(text: string, unit: AngleUnit): number {
  if (unit === 'sexagesimal' || SEXAGESIMAL.test(text)) return parseRa(text);
  const value = readNumber(text, 'RA');
  const degrees = unit === 'hour' ? value * 15 : unit === 'rad' ? (value * 180) / Math.PI : value;
  if (degrees < 0 || degrees >= 360) throw new RangeError(`RA ${text} is outside 0–360°`);
  return degrees;
}

function readDec(text: string, unit: AngleUnit): number {
  if (unit === 'sexagesimal' || SEXAGESIMAL.test(text.replace(/^[+\-−]\s*/, ''))) return parseDec(text);
  const value = readNumber(text, 'Dec');
  const degrees = unit === 'rad' ? (value * 180) / Math.PI : value;
  if (unit === 'hour') throw new RangeError('Dec cannot be given in hours');
  if (degrees < -90 || degrees > 90) throw new RangeError(`Dec ${text} is outside −90° to +90°`);
  return degrees;
}

// ---------------------------------------------------------------------------------------------- reader

function detectFormat(text: string): ReferenceFormat {
  return text
    .replace(/^\uFEFF/, '')
    .trimStart()
    .startsWith('<')
    ? 'votable'
    : 'csv';
}

/**
 * The file's columns and its first `sampleRows` rows as text cells, without choosing position columns: what a
 * person needs to pick the columns when the guess fails. Throws {@link ReferenceCatalogueError} when the file
 * cannot be read as CSV or VOTable at all.
 */
export function readReferenceColumns(
  text: string,
  options: { format?: ReferenceFormat; sampleRows?: number } = {},
): { format: ReferenceFormat; columns: ReferenceColumn[]; rows: (string | null)[][]; rowCount: number } {
  if (text.trim() === '') throw new ReferenceCatalogueError('The reference catalogue file is empty.');
  const format = options.format ?? detectFormat(text);
  const raw = format === 'votable' ? readVotableTable(text) : readCsvTable(text);
  return {
    format,
    columns: raw.columns,
    rows: raw.rows.slice(0, options.sampleRows ?? 10).map((row) => row.cells),
    rowCount: raw.rows.length,
  };
}

/** Reads a reference catalogue from its text (see the file comment). */
export function readReferenceCatalogue(text: string, options: ReadReferenceOptions = {}): ReferenceCatalogue {
  if (text.trim() === '') throw new ReferenceCatalogueError('The reference catalogue file is empty.');
  const format = options.format ?? detectFormat(text);
  const raw = format === 'votable' ? readVotableTable(text) : readCsvTable(text);
  const names = raw.columns.map((column) => column.name);
  const given = options.mapping ?? {};
  for (const [key, name] of Object.entries(given)) {
    if (name !== undefined && !names.includes(name)) {
      throw new ReferenceCatalogueError(
        `Column "${name}" (chosen for ${key}) is not in the file; its columns are: ${names.join(', ')}.`,
      );
    }
  }
  const guessed = guessColumnMapping(raw.columns);
  const mapping: ColumnMapping = {
    ...guessed,
    ...Object.fromEntries(Object.entries(given).filter(([, v]) => v)),
  };
  const hasSky = mapping.ra !== undefined && mapping.dec !== undefined;
  const hasPixel = mapping.x !== undefined && mapping.y !== undefined;
  let positions: 'sky' | 'pixel';
  if (options.positions === 'pixel' || (!hasSky && hasPixel && options.positions !== 'sky')) {
    if (!hasPixel)
      throw new ReferenceCatalogueError(`No pixel x/y columns found; columns are: ${names.join(', ')}.`);
    positions = 'pixel';
  } else if (hasSky) {
    positions = 'sky';
  } else if (mapping.ra !== undefined || mapping.dec !== undefined) {
    const missing = mapping.ra === undefined ? 'RA' : 'Dec';
    throw new ReferenceCatalogueError(
      `Found ${missing === 'RA' ? 'a Dec' : 'an RA'} column but no ${missing} column; choose the ${missing} column. ` +
        `Columns are: ${names.join(', ')}.`,
    );
  } else {
    throw new ReferenceCatalogueError(
      'No position columns found: looked for RA/Dec (names such as ra, dec, raj2000, dej2000 or UCDs pos.eq.ra, ' +
        `pos.eq.dec) and pixel x/y. Columns are: ${names.join(', ')}. Choose the position columns.`,
    );
  }
  if (positions === 'pixel') {
    delete mapping.ra;
    delete mapping.dec;
  } else {
    delete mapping.x;
    delete mapping.y;
  }
  const indexOf = (name: string | undefined) => (name === undefined ? -1 : names.indexOf(name));
  const column = (name: string | undefined) =>
    name === undefined ? null : raw.columns[names.indexOf(name)]!;
  const raUnit = positions === 'sky' ? angleUnit(column(mapping.ra)!.unit, 'RA') : 'deg';
  const decUnit = positions === 'sky' ? angleUnit(column(mapping.dec)!.unit, 'Dec') : 'deg';
  const at = {
    ra: indexOf(mapping.ra),
    dec: indexOf(mapping.dec),
    x: indexOf(mapping.x),
    y: indexOf(mapping.y),
    flux: indexOf(mapping.flux),
    id: indexOf(mapping.id),
  };
  const entries: ReferenceEntry[] = [];
  const rejected: RejectedRow[] = [];
  let rejectedCount = 0;
  const maxListed = options.maxRejectedListed ?? 1000;
  raw.rows.forEach(({ cells, line, fieldCount }, index) => {
    const row = index + 1;
    const reject = (reason: string) => {
      rejectedCount++;
      if (rejected.length < maxListed) rejected.push({ row, line, reason });
    };
    if (fieldCount !== names.length) {
      reject(`has ${fieldCount} fields but the header has ${names.length}`);
      return;
    }
    const cell = (i: number) => (i < 0 ? null : cells[i]!);
    try {
      const entry: ReferenceEntry = {
        row,
        id: cell(at.id),
        ra: null,
        dec: null,
        x: null,
        y: null,
        flux: null,
      };
      if (positions === 'sky') {
        const raText = cell(at.ra);
        const decText = cell(at.dec);
        if (raText === null) throw new RangeError('RA is empty');
        if (decText === null) throw new RangeError('Dec is empty');
        entry.ra = readRa(raText, raUnit);
        entry.dec = readDec(decText, decUnit);
      } else {
        const xText = cell(at.x);
        const yText = cell(at.y);
        if (xText === null || yText === null) throw new RangeError('x or y is empty');
        entry.x = readNumber(xText, 'x');
        entry.y = readNumber(yText, 'y');
      }
      const fluxText = cell(at.flux);
      if (fluxText !== null) entry.flux = readNumber(fluxText, 'flux');
      entries.push(entry);
    } catch (error) {
      if (error instanceof ReferenceCatalogueError) throw error;
      reject((error as Error).message);
    }
  });
  return {
    format,
    positions,
    columns: raw.columns,
    mapping,
    entries,
    rejected,
    rejectedCount,
    rowsRead: raw.rows.length,
  };
}
