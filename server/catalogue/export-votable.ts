/**
 * VOTable 1.4 export (IVOA Recommendation "VOTable Format Definition Version 1.4", 2019-10-21), TABLEDATA
 * serialization, built with xmlbuilder2 so every name and value is escaped by the XML library.
 *
 * Layout: VOTABLE version="1.4" → RESOURCE type="results" → DESCRIPTION (the caution), PARAMs for the run's
 * provenance (image, SHA-256, beam, settings digest, software version, time) → TABLE → FIELDs (datatype, unit as
 * VOUnit, ucd as UCD1+ words, DESCRIPTION) → DATA/TABLEDATA.
 *
 * Namespace: VOTable 1.4 keeps the namespace URI `http://www.ivoa.net/xml/VOTable/v1.3` (the 1.4 schema's
 * targetNamespace is that URI, with version="1.4"), so that is the one written here.
 *
 * Nulls (VOTable 1.4 §6.1): a null double is an empty TD, which readers take as NaN; a nullable int column
 * declares `<VALUES null="-2147483648"/>` and writes that sentinel; a null char cell is an empty TD.
 */
import { create } from 'xmlbuilder2';
import type { XMLBuilder } from 'xmlbuilder2/lib/interfaces';
import { CATALOGUE_CAUTION, checkTable } from './catalogue-table';
import type { CatalogueTable, CellValue, TableColumn } from './catalogue-table';

export const VOTABLE_NAMESPACE = 'http://www.ivoa.net/xml/VOTable/v1.3';
/** The null sentinel of nullable int columns (also TNULLn in the FITS table). */
export const INT_NULL = -2147483648;

const COOSYS_ID = 'equatorial_frame';

function fieldAttributes(column: TableColumn, hasFrame: boolean): Record<string, string> {
  const attributes: Record<string, string> = {
    name: column.name,
    ID: `col_${column.name}`,
    datatype: column.datatype,
  };
  if (column.datatype === 'char') attributes.arraysize = '*';
  if (hasFrame && column.inFrame) attributes.ref = COOSYS_ID;
  if (column.unit !== '') attributes.unit = column.unit;
  if (column.ucd !== '') attributes.ucd = column.ucd;
  return attributes;
}

function tdText(value: CellValue, column: TableColumn): string {
  if (value === null || (typeof value === 'number' && Number.isNaN(value))) {
    return column.datatype === 'int' ? String(INT_NULL) : '';
  }
  return String(value);
}

function addParam(
  parent: XMLBuilder,
  name: string,
  value: string | number,
  unit: string,
  ucd: string,
  description: string,
) {
  const attributes: Record<string, string> =
    typeof value === 'number'
      ? { name, datatype: 'double', value: String(value) }
      : { name, datatype: 'char', arraysize: '*', value };
  if (unit !== '') attributes.unit = unit;
  if (ucd !== '') attributes.ucd = ucd;
  parent.ele('PARAM', attributes).ele('DESCRIPTION').txt(description);
}

/** The table as a VOTable 1.4 document (UTF-8 XML text). */
export function tableToVotable(table: CatalogueTable): string {
  checkTable(table);
  const { provenance } = table;
  const root = create({ version: '1.0', encoding: 'UTF-8' }).ele(VOTABLE_NAMESPACE, 'VOTABLE', {
    version: '1.4',
  });
  const resource = root.ele('RESOURCE', { type: 'results', name: 'skysieve' });
  resource.ele('DESCRIPTION').txt(CATALOGUE_CAUTION);
  const frame = provenance.equatorialFrame ?? null;
  if (frame) {
    // VOTable 1.4 §3.1 COOSYS: system ICRS, eq_FK5 or eq_FK4; the equinox as a Julian or Besselian year.
    const system = frame.system === 'ICRS' ? 'ICRS' : frame.system === 'FK5' ? 'eq_FK5' : 'eq_FK4';
    const attributes: Record<string, string> = { ID: COOSYS_ID, system };
    if (frame.system !== 'ICRS') {
      const equinox = frame.equinox ?? (frame.system === 'FK5' ? 2000 : 1950);
      attributes.equinox = `${frame.system === 'FK5' ? 'J' : 'B'}${equinox.toFixed(1)}`;
    }
    resource.ele('COOSYS', attributes);
  }
  addParam(
    resource,
    'image_name',
    provenance.imageName,
    '',
    'meta.id;meta.file',
    'File name of the image the catalogue was measured on',
  );
  addParam(
    resource,
    'image_sha256',
    provenance.imageSha256,
    '',
    'meta.code;meta.file',
    'SHA-256 of the image file',
  );
  addParam(resource, 'image_unit', provenance.imageUnit, '', 'meta.unit', 'BUNIT of the image');
  if (provenance.beam) {
    addParam(
      resource,
      'beam_major',
      provenance.beam.majorArcsec,
      'arcsec',
      'phys.angSize;instr.beam',
      'Beam FWHM, major axis',
    );
    addParam(
      resource,
      'beam_minor',
      provenance.beam.minorArcsec,
      'arcsec',
      'phys.angSize;instr.beam',
      'Beam FWHM, minor axis',
    );
    addParam(
      resource,
      'beam_pa',
      provenance.beam.positionAngleDeg,
      'deg',
      'pos.posAng;instr.beam',
      'Beam position angle, east of north',
    );
  }
  addParam(
    resource,
    'settings_digest',
    provenance.settingsDigest,
    '',
    'meta.code',
    'Digest of the separation settings',
  );
  addParam(
    resource,
    'software_version',
    provenance.softwareVersion,
    '',
    'meta.version;meta.software',
    'Skysieve version',
  );
  addParam(
    resource,
    'created_at',
    provenance.createdAt,
    '',
    'time.creation',
    'Time the catalogue was made (ISO 8601, UTC)',
  );

  const tableElement = resource.ele('TABLE', { name: 'catalogue', nrows: String(table.rows.length) });
  tableElement.ele('DESCRIPTION').txt(table.title);
  for (const parameter of table.parameters ?? []) {
    addParam(
      tableElement,
      parameter.name,
      parameter.value,
      parameter.unit,
      parameter.ucd,
      parameter.description,
    );
  }
  for (const column of table.columns) {
    const field = tableElement.ele('FIELD', fieldAttributes(column, frame !== null));
    field.ele('DESCRIPTION').txt(column.description);
    if (column.datatype === 'int' && column.nullable) field.ele('VALUES', { null: String(INT_NULL) });
  }
  const tableData = tableElement.ele('DATA').ele('TABLEDATA');
  for (const row of table.rows) {
    const tr = tableData.ele('TR');
    row.forEach((value, index) => {
      const text = tdText(value, table.columns[index]!);
      const td = tr.ele('TD');
      if (text !== '') td.txt(text);
    });
  }
  return root.end({ prettyPrint: true });
}
