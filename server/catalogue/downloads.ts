/**
 * What the run, cross-match and injection-study exports share: the provenance a result table carries, and a
 * table written as a CSV, VOTable or FITS download (its media type, file name and bytes).
 */
import type { CatalogueProvenance, CatalogueTable } from './catalogue-table';
import { tableToCsv } from './export-csv';
import { tableToFitsBintable } from './export-fits-table';
import { tableToVotable } from './export-votable';

export type TableFormat = 'csv' | 'votable' | 'fits';

export interface Download {
  contentType: string;
  fileName: string;
  body: Buffer | string;
}

/** The stored facts of the image a table came from (a row of `images`). */
export interface ProvenanceImage {
  name: string;
  contentSha256: string;
  unit: string | null;
  beam: { majorArcsec: number; minorArcsec: number; paDeg: number } | null;
}

/** The run a table came from. */
export interface ProvenanceRun {
  settingsDigest: string;
  provenance: { softwareVersion: string } | null;
}

/**
 * The provenance of a table made from a run of an image. The software version is the one that ran the fit,
 * `currentVersion` when the run has none recorded; `createdAt` is an ISO 8601 time.
 */
export function catalogueProvenance(
  image: ProvenanceImage,
  run: ProvenanceRun,
  currentVersion: string,
  createdAt: string,
): CatalogueProvenance {
  return {
    imageName: image.name,
    imageSha256: image.contentSha256,
    imageUnit: image.unit ?? '',
    beam: image.beam
      ? {
          majorArcsec: image.beam.majorArcsec,
          minorArcsec: image.beam.minorArcsec,
          positionAngleDeg: image.beam.paDeg,
        }
      : null,
    settingsDigest: run.settingsDigest,
    softwareVersion: run.provenance?.softwareVersion ?? currentVersion,
    createdAt,
  };
}

/** A result table in one of the catalogue formats, as a download named `<base>.csv|.xml|.fits`. */
export function tableDownload(table: CatalogueTable, base: string, format: TableFormat): Download {
  if (format === 'csv')
    return { contentType: 'text/csv; charset=utf-8', fileName: `${base}.csv`, body: tableToCsv(table) };
  if (format === 'votable') {
    return {
      contentType: 'application/x-votable+xml; charset=utf-8',
      fileName: `${base}.xml`,
      body: tableToVotable(table),
    };
  }
  return {
    contentType: 'application/fits',
    fileName: `${base}.fits`,
    body: Buffer.from(tableToFitsBintable(table)),
  };
}
