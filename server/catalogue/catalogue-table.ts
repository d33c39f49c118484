/**
 * The format-neutral table every catalogue export is written from.
 *
 * A table is a list of typed columns (name, datatype, VOUnit, UCD1+ word list, description) and rows of plain
 * values, plus the run's provenance. The CSV, VOTable and FITS-table writers all take this one shape, so a source
 * catalogue and a cross-match result share the same writers.
 *
 * Null handling: a `double` cell may be null (written as an empty CSV field, an empty VOTable TD — NaN for
 * floating point per VOTable 1.4 §6 — and NaN in FITS, FITS Standard 4.0 §7.3.3.1); an `int` cell may be null only
 * when its column is marked `nullable` (empty CSV field, empty TD with a VALUES null sentinel, TNULLn in FITS).
 */
import type { CatalogueSource } from '../../shared/catalogue';

export type ColumnDatatype = 'double' | 'int' | 'char';
export type CellValue = number | string | null;

export interface TableColumn {
  /** Column name: lower-case, letters, digits and underscores (valid in CSV, VOTable and FITS TTYPEn). */
  name: string;
  datatype: ColumnDatatype;
  /** VOUnit string (IVOA VOUnits 1.0); '' for dimensionless or unknown. */
  unit: string;
  /** IVOA UCD1+ word list, e.g. `pos.eq.ra;meta.main`. */
  ucd: string;
  description: string;
  /** Only meaningful for `int`: the column may hold nulls. */
  nullable?: boolean;
  /** RA/Dec columns in the provenance's equatorial frame (VOTable FIELD ref to its COOSYS). */
  inFrame?: boolean;
}

/** Where a catalogue came from; carried into the CSV sidecar, VOTable PARAMs and FITS header cards. */
export interface CatalogueProvenance {
  /** The uploaded image's file name. */
  imageName: string;
  /** SHA-256 of the image file, 64 lower-case hex digits. */
  imageSha256: string;
  /** The image's BUNIT as a VOUnit string ('' when unknown). */
  imageUnit: string;
  /** Restoring beam / PSF FWHM, null when the image has none. */
  beam: { majorArcsec: number; minorArcsec: number; positionAngleDeg: number } | null;
  /** A digest of the separation settings, so two runs with the same settings can be recognised. */
  settingsDigest: string;
  /** Skysieve version that made the catalogue. */
  softwareVersion: string;
  /** ISO 8601 time the catalogue was made. */
  createdAt: string;
  /** The image's equatorial frame (RADESYS / EQUINOX), when it has a celestial WCS. */
  equatorialFrame?: { system: 'ICRS' | 'FK5' | 'FK4'; equinox?: number } | null;
}

/** A single value that describes the whole table (e.g. the match radius): a VOTable PARAM, a FITS card. */
export interface TableParameter {
  /** Lower-case name, at most 8 characters so it can also be a FITS keyword (upper-cased there). */
  name: string;
  value: number | string;
  unit: string;
  ucd: string;
  description: string;
}

export interface CatalogueTable {
  /** What the table holds, one line (VOTable TABLE description, FITS comment). */
  title: string;
  columns: TableColumn[];
  rows: CellValue[][];
  provenance: CatalogueProvenance;
  /** Table-wide values beyond the provenance. */
  parameters?: TableParameter[];
}

/** The caution that travels with every export (DEVELOPERS.md: show the usual cautions). */
export const CATALOGUE_CAUTION =
  'This catalogue is model-dependent: positions, fluxes and errors come from a fitted model of the image ' +
  '(diffuse field plus compact sources) and change with the settings. Completeness and reliability are not ' +
  'implied by this list; they must be measured (for example by injecting artificial sources) for this image ' +
  'and these settings.';

/**
 * Units of the flux columns, derived from the image's BUNIT.
 * - per-beam images (`Jy/beam`): flux is the summed image values, `Jy.pixel/beam`; flux density `Jy` (divided by
 *   the beam area in pixels);
 * - per-pixel images (`Jy/pix`, `ct/pix`): the pixel unit cancels (`Jy`, `ct`); no flux density;
 * - counts images (`ct`, `count`, `counts`, `ph`): counts; no flux density;
 * - anything else (e.g. `MJy/sr`): image unit × pixels, written `pixel.MJy/sr` (the multiplier first, so the
 *   division still binds to `sr` only).
 * Pixels and counts are spelled `pixel` and `count`: VOUnits 1.0 deprecates the short `pix` and `ct` (astropy's
 * VOUnit parser warns on them).
 */
export function fluxUnits(imageUnit: string): { flux: string; fluxDensity: string } {
  const unit = imageUnit.trim();
  if (unit === '') return { flux: '', fluxDensity: '' };
  const perBeam = /^(.*)\/beam$/i.exec(unit);
  if (perBeam?.[1]) return { flux: `${perBeam[1]}.pixel/beam`, fluxDensity: perBeam[1] };
  const perPixel = /^(.*)\/(pix|pixel)$/i.exec(unit);
  if (perPixel?.[1]) return { flux: perPixel[1], fluxDensity: '' };
  if (/^(ct|count|counts)$/i.test(unit)) return { flux: 'count', fluxDensity: '' };
  if (/^(ph|photon|photons)$/i.test(unit)) return { flux: 'photon', fluxDensity: '' };
  return { flux: `pixel.${unit}`, fluxDensity: '' };
}

/** The catalogue's columns, in the order of the CSV header (issue 4). */
export function sourceColumns(imageUnit: string): TableColumn[] {
  const units = fluxUnits(imageUnit);
  return [
    {
      name: 'id',
      datatype: 'int',
      unit: '',
      ucd: 'meta.id;meta.main',
      description: 'Running number, brightest first',
    },
    {
      name: 'x',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.x;instr.pixel',
      description: 'Pixel x position, FITS convention (1 = centre of the first pixel)',
    },
    {
      name: 'y',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.y;instr.pixel',
      description: 'Pixel y position, FITS convention (1 = centre of the first pixel)',
    },
    {
      name: 'x_err',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'stat.error;pos.cartesian.x',
      description: '1 sigma error on x',
    },
    {
      name: 'y_err',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'stat.error;pos.cartesian.y',
      description: '1 sigma error on y',
    },
    {
      name: 'ra',
      datatype: 'double',
      unit: 'deg',
      ucd: 'pos.eq.ra;meta.main',
      description: 'Right ascension',
      inFrame: true,
    },
    {
      name: 'dec',
      datatype: 'double',
      unit: 'deg',
      ucd: 'pos.eq.dec;meta.main',
      description: 'Declination',
      inFrame: true,
    },
    {
      name: 'ra_err',
      datatype: 'double',
      unit: 'arcsec',
      ucd: 'stat.error;pos.eq.ra',
      description: '1 sigma error on RA*cos(Dec)',
    },
    {
      name: 'dec_err',
      datatype: 'double',
      unit: 'arcsec',
      ucd: 'stat.error;pos.eq.dec',
      description: '1 sigma error on Dec',
    },
    {
      name: 'flux',
      datatype: 'double',
      unit: units.flux,
      ucd: 'phot.flux',
      description: 'Total flux: summed model contribution in image units times pixels',
    },
    {
      name: 'flux_err',
      datatype: 'double',
      unit: units.flux,
      ucd: 'stat.error;phot.flux',
      description: '1 sigma error on flux',
    },
    {
      name: 'flux_density',
      datatype: 'double',
      unit: units.fluxDensity,
      ucd: 'phot.flux.density',
      description: 'Flux divided by the beam area in pixels (per-beam images only)',
    },
    {
      name: 'flux_density_err',
      datatype: 'double',
      unit: units.fluxDensity,
      ucd: 'stat.error;phot.flux.density',
      description: '1 sigma error on flux_density',
    },
    { name: 'snr', datatype: 'double', unit: '', ucd: 'stat.snr', description: 'flux / flux_err' },
    {
      name: 'significance',
      datatype: 'double',
      unit: '',
      ucd: 'stat.snr',
      description: 'Counts images: detection significance against the background alone (Gaussian sigma)',
    },
    {
      name: 'flags',
      datatype: 'char',
      unit: '',
      ucd: 'meta.code.qual',
      description: "Quality flags joined with '|': edge, near-mask, blended",
    },
  ];
}

/** One source as a row in the order of {@link sourceColumns}. */
export function sourceRow(source: CatalogueSource): CellValue[] {
  return [
    source.id,
    source.x,
    source.y,
    source.xErr,
    source.yErr,
    source.ra,
    source.dec,
    source.raErrArcsec,
    source.decErrArcsec,
    source.flux,
    source.fluxErr,
    source.fluxDensity,
    source.fluxDensityErr,
    source.snr,
    source.significance,
    source.flags.join('|'),
  ];
}

/** A source catalogue as a table, ready for any writer. */
export function sourcesToTable(
  sources: readonly CatalogueSource[],
  provenance: CatalogueProvenance,
): CatalogueTable {
  return {
    title: 'Skysieve source catalogue',
    columns: sourceColumns(provenance.imageUnit),
    rows: sources.map(sourceRow),
    provenance,
  };
}

/**
 * Checks that rows fit the columns (count, datatype, nulls) before anything is written, so a writer never
 * produces half a file. Throws a message naming the first bad row and column.
 */
export function checkTable(table: CatalogueTable): void {
  if (table.columns.length === 0) throw new Error('A catalogue table needs at least one column.');
  const seen = new Set<string>();
  for (const column of table.columns) {
    if (!/^[a-z][a-z0-9_]*$/.test(column.name)) {
      throw new Error(`Column name "${column.name}" must start with a letter and use only a-z, 0-9 and _.`);
    }
    if (seen.has(column.name)) throw new Error(`Column name "${column.name}" appears twice.`);
    seen.add(column.name);
  }
  for (const parameter of table.parameters ?? []) {
    if (!/^[a-z][a-z0-9_]{0,7}$/.test(parameter.name)) {
      throw new Error(
        `Parameter name "${parameter.name}" must be 1-8 characters a-z, 0-9, _ starting with a letter.`,
      );
    }
    if (typeof parameter.value === 'number' && !Number.isFinite(parameter.value)) {
      throw new Error(`Parameter ${parameter.name} must be a finite number.`);
    }
  }
  table.rows.forEach((row, rowIndex) => {
    if (row.length !== table.columns.length) {
      throw new Error(
        `Row ${rowIndex + 1} has ${row.length} values but the table has ${table.columns.length} columns.`,
      );
    }
    row.forEach((value, columnIndex) => {
      const column = table.columns[columnIndex]!;
      const where = `Row ${rowIndex + 1}, column ${column.name}`;
      if (value === null) {
        if (column.datatype === 'int' && !column.nullable)
          throw new Error(`${where}: null in a non-null integer column.`);
        return;
      }
      if (column.datatype === 'char') {
        if (typeof value !== 'string') throw new Error(`${where}: expected text, got ${typeof value}.`);
      } else if (typeof value !== 'number') {
        throw new Error(`${where}: expected a number, got ${typeof value}.`);
      } else if (value === Infinity || value === -Infinity) {
        throw new Error(`${where}: ${value} is not a finite number.`);
      } else if (column.datatype === 'int' && (!Number.isInteger(value) || Math.abs(value) > 2147483647)) {
        throw new Error(`${where}: ${value} is not a 32-bit integer.`);
      }
    });
  });
}
