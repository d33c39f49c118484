/**
 * FITS binary-table export (FITS Standard 4.0, IAU FITS Working Group 2018): an empty primary HDU
 * (NAXIS = 0, EXTEND = T) followed by one BINTABLE extension named CATALOGUE.
 *
 * Extension header in the order §7.3.1 requires: XTENSION = 'BINTABLE', BITPIX = 8, NAXIS = 2, NAXIS1 = bytes per
 * row, NAXIS2 = rows, PCOUNT = 0, GCOUNT = 1, TFIELDS; then per column TTYPEn (the UCD1+ words go in its
 * comment: the Standard has no UCD keyword), TFORMn, TUNITn and, for nullable integers, TNULLn. Provenance and
 * table parameters follow as cards, the caution as COMMENT cards. Cards are formatted by the engine's FITS card
 * formatter (server/engine/io/header-card).
 *
 * Data (§7.3.3): rows of fixed width, big-endian. double → 'D' (IEEE 754 double, null = NaN, §7.3.3.1);
 * int → 'J' (32-bit two's complement, null = TNULLn = −2147483648); char → 'wA' with w the longest value (at least
 * 1), ended by ASCII NUL when shorter (§7.3.3.1), printable ASCII only (other characters are written as '?'). Header and data are padded
 * to 2880-byte blocks, the data with zeros (§3.3.2, §7.3.5).
 */
import { BLOCK_BYTES, formatHeader, padToBlock } from '../engine/io/header-card';
import type { HeaderCard } from '../engine/io/header-card';
import { CATALOGUE_CAUTION, checkTable } from './catalogue-table';
import type { CatalogueTable, TableColumn } from './catalogue-table';
import { INT_NULL } from './export-votable';

function asciiBytes(text: string): number[] {
  return Array.from(text, (character) => {
    const code = character.charCodeAt(0);
    return character.length === 1 && code >= 32 && code <= 126 ? code : 63;
  });
}

interface ColumnLayout {
  column: TableColumn;
  form: string;
  width: number;
  offset: number;
}

function layoutColumns(table: CatalogueTable): ColumnLayout[] {
  let offset = 0;
  return table.columns.map((column, index) => {
    let width: number;
    let form: string;
    if (column.datatype === 'double') {
      width = 8;
      form = 'D';
    } else if (column.datatype === 'int') {
      width = 4;
      form = 'J';
    } else {
      width = Math.max(1, ...table.rows.map((row) => asciiBytes((row[index] as string | null) ?? '').length));
      form = `${width}A`;
    }
    const layout = { column, form, width, offset };
    offset += width;
    return layout;
  });
}

/** Splits the caution into COMMENT cards of at most 72 characters, at word boundaries. */
function commentCards(text: string): HeaderCard[] {
  const cards: HeaderCard[] = [];
  let line = '';
  for (const word of text.split(/\s+/)) {
    if (line !== '' && line.length + 1 + word.length > 72) {
      cards.push({ keyword: 'COMMENT', comment: line });
      line = word;
    } else line = line === '' ? word : `${line} ${word}`;
  }
  if (line !== '') cards.push({ keyword: 'COMMENT', comment: line });
  return cards;
}

function provenanceCards(table: CatalogueTable): HeaderCard[] {
  const p = table.provenance;
  const cards: HeaderCard[] = [
    { keyword: 'ORIGIN', value: 'Skysieve', comment: 'software that wrote this file' },
    {
      keyword: 'DATE',
      value: p.createdAt.replace(/(\.\d+)?Z$/, ''),
      comment: 'catalogue creation time (UTC)',
    },
    { keyword: 'IMAGE', value: p.imageName, comment: 'image the catalogue was measured on' },
    { keyword: 'IMGSHA', value: p.imageSha256, comment: 'SHA-256 of the image file' },
  ];
  if (p.equatorialFrame) {
    cards.push({
      keyword: 'RADESYS',
      value: p.equatorialFrame.system,
      comment: 'frame of the RA/Dec columns',
    });
    if (p.equatorialFrame.system !== 'ICRS') {
      const equinox = p.equatorialFrame.equinox ?? (p.equatorialFrame.system === 'FK5' ? 2000 : 1950);
      cards.push({ keyword: 'EQUINOX', value: equinox, real: true, comment: '[yr] equinox of the frame' });
    }
  }
  if (p.imageUnit !== '')
    cards.push({ keyword: 'IMGUNIT', value: p.imageUnit, comment: 'BUNIT of the image' });
  if (p.beam) {
    cards.push(
      {
        keyword: 'BMAJ',
        value: p.beam.majorArcsec / 3600,
        real: true,
        comment: '[deg] beam FWHM, major axis',
      },
      {
        keyword: 'BMIN',
        value: p.beam.minorArcsec / 3600,
        real: true,
        comment: '[deg] beam FWHM, minor axis',
      },
      { keyword: 'BPA', value: p.beam.positionAngleDeg, real: true, comment: '[deg] beam position angle' },
    );
  }
  cards.push(
    { keyword: 'SETDIGST', value: p.settingsDigest, comment: 'digest of the separation settings' },
    { keyword: 'SKYSVER', value: p.softwareVersion, comment: 'Skysieve version' },
  );
  for (const parameter of table.parameters ?? []) {
    const unit = parameter.unit === '' ? '' : `[${parameter.unit}] `;
    cards.push({
      keyword: parameter.name.toUpperCase(),
      value: parameter.value,
      real:
        typeof parameter.value === 'number'
          ? !Number.isInteger(parameter.value) || parameter.unit !== ''
          : undefined,
      comment: `${unit}${parameter.description}`,
    });
  }
  return cards;
}

/** The table as a FITS file: empty primary HDU + BINTABLE extension 'CATALOGUE'. */
export function tableToFitsBintable(table: CatalogueTable): Uint8Array {
  checkTable(table);
  const layouts = layoutColumns(table);
  const rowBytes = layouts.reduce((sum, layout) => sum + layout.width, 0);

  const primary = formatHeader([
    { keyword: 'SIMPLE', value: true, comment: 'conforms to the FITS Standard 4.0' },
    { keyword: 'BITPIX', value: 8 },
    { keyword: 'NAXIS', value: 0, comment: 'no primary data; the catalogue is in extension 1' },
    { keyword: 'EXTEND', value: true },
    { keyword: 'ORIGIN', value: 'Skysieve', comment: 'software that wrote this file' },
  ]);

  const cards: HeaderCard[] = [
    { keyword: 'XTENSION', value: 'BINTABLE', comment: 'binary table extension' },
    { keyword: 'BITPIX', value: 8 },
    { keyword: 'NAXIS', value: 2 },
    { keyword: 'NAXIS1', value: rowBytes, comment: 'bytes per row' },
    { keyword: 'NAXIS2', value: table.rows.length, comment: 'rows' },
    { keyword: 'PCOUNT', value: 0, comment: 'no heap' },
    { keyword: 'GCOUNT', value: 1 },
    { keyword: 'TFIELDS', value: layouts.length, comment: 'columns' },
  ];
  layouts.forEach(({ column, form }, index) => {
    const n = index + 1;
    cards.push({ keyword: `TTYPE${n}`, value: column.name, comment: column.ucd || column.description });
    cards.push({ keyword: `TFORM${n}`, value: form });
    if (column.unit !== '') cards.push({ keyword: `TUNIT${n}`, value: column.unit });
    if (column.datatype === 'int' && column.nullable) cards.push({ keyword: `TNULL${n}`, value: INT_NULL });
  });
  cards.push({ keyword: 'EXTNAME', value: 'CATALOGUE', comment: table.title });
  cards.push(...provenanceCards(table), ...commentCards(CATALOGUE_CAUTION));
  const extensionHeader = formatHeader(cards);

  const data = new Uint8Array(rowBytes * table.rows.length);
  const view = new DataView(data.buffer);
  table.rows.forEach((row, r) => {
    const base = r * rowBytes;
    layouts.forEach(({ column, offset }, c) => {
      const value = row[c] ?? null;
      const at = base + offset;
      if (column.datatype === 'double') view.setFloat64(at, value === null ? NaN : (value as number), false);
      else if (column.datatype === 'int')
        view.setInt32(at, value === null ? INT_NULL : (value as number), false);
      else {
        const bytes = asciiBytes((value as string | null) ?? '');
        data.set(bytes, at);
      }
    });
  });
  const paddedData = padToBlock(data, 0);

  const file = new Uint8Array(primary.length + extensionHeader.length + paddedData.length);
  file.set(primary, 0);
  file.set(extensionHeader, primary.length);
  file.set(paddedData, primary.length + extensionHeader.length);
  if (file.length % BLOCK_BYTES !== 0) throw new Error('internal: FITS file is not a whole number of blocks');
  return file;
}
