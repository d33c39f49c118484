/**
 * CSV export (RFC 4180: comma-separated, CRLF line ends, fields with commas, quotes or line breaks quoted and
 * inner quotes doubled) with one header row of column names. Nothing else goes into the CSV: units, UCDs and the
 * run's provenance travel in a JSON sidecar ({@link csvSidecar}) instead of comment lines, so any CSV reader can
 * read the file as is.
 *
 * Numbers are written with JavaScript's shortest round-trip form (ECMA-262 Number::toString), so a reader that
 * parses IEEE doubles gets back exactly the value written. Nulls (and NaN) are empty fields.
 */
import { stringify } from 'csv-stringify/sync';
import { CATALOGUE_CAUTION, checkTable } from './catalogue-table';
import type { CatalogueProvenance, CatalogueTable, CellValue, TableParameter } from './catalogue-table';

function csvCell(value: CellValue): string {
  if (value === null) return '';
  if (typeof value === 'number') return Number.isNaN(value) ? '' : String(value);
  return value;
}

/** The table as RFC 4180 CSV text (header row + one record per row, CRLF after every record). */
export function tableToCsv(table: CatalogueTable): string {
  checkTable(table);
  const records = [table.columns.map((column) => column.name), ...table.rows.map((row) => row.map(csvCell))];
  return stringify(records, { record_delimiter: 'windows', quoted_match: [/^\s|\s$/, /[\r\n]/] });
}

export interface CsvSidecar {
  format: 'Skysieve catalogue sidecar';
  /** The CSV file this describes. */
  table: string;
  title: string;
  caution: string;
  rows: number;
  columns: { name: string; datatype: string; unit: string; ucd: string; description: string }[];
  provenance: CatalogueProvenance;
  parameters: TableParameter[];
}

/** The JSON sidecar describing a CSV export: units and UCDs per column, provenance, the caution. */
export function csvSidecar(table: CatalogueTable, csvFileName: string): CsvSidecar {
  return {
    format: 'Skysieve catalogue sidecar',
    table: csvFileName,
    title: table.title,
    caution: CATALOGUE_CAUTION,
    rows: table.rows.length,
    columns: table.columns.map(({ name, datatype, unit, ucd, description }) => ({
      name,
      datatype,
      unit,
      ucd,
      description,
    })),
    provenance: table.provenance,
    parameters: table.parameters ?? [],
  };
}
