/**
 * Writes a catalogue to disk in the chosen formats: catalogue.csv (+ catalogue.json sidecar), catalogue.vot,
 * catalogue.fits. Every file's content is built (and the table checked) before anything touches the disk, and
 * each file is written under a temporary name and renamed into place, so a failure leaves no half-written file.
 */
import { mkdir, rename, rm, writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import type { CatalogueSource } from '../../shared/catalogue';
import { sourcesToTable } from './catalogue-table';
import type { CatalogueProvenance, CatalogueTable } from './catalogue-table';
import { csvSidecar, tableToCsv } from './export-csv';
import { tableToFitsBintable } from './export-fits-table';
import { tableToVotable } from './export-votable';

export type CatalogueFormat = 'csv' | 'votable' | 'fits';
export const CATALOGUE_FORMATS: readonly CatalogueFormat[] = ['csv', 'votable', 'fits'];

/** Reads a comma-separated list such as 'csv,votable,fits' (the command line's --formats). */
export function parseCatalogueFormats(text: string): CatalogueFormat[] {
  const formats = text
    .split(',')
    .map((item) => item.trim().toLowerCase())
    .filter((item) => item !== '');
  if (formats.length === 0) throw new Error('Give at least one catalogue format: csv, votable or fits.');
  for (const format of formats) {
    if (!(CATALOGUE_FORMATS as readonly string[]).includes(format)) {
      throw new Error(`Unknown catalogue format "${format}"; use csv, votable or fits.`);
    }
  }
  return [...new Set(formats)] as CatalogueFormat[];
}

/** Writes any table (a source catalogue or a cross-match) under `baseName`.{csv,json,vot,fits}. */
export async function writeTableFiles(
  dir: string,
  formats: readonly CatalogueFormat[],
  table: CatalogueTable,
  baseName = 'catalogue',
): Promise<string[]> {
  if (formats.length === 0) throw new Error('Give at least one catalogue format: csv, votable or fits.');
  const contents: [string, string | Uint8Array][] = [];
  for (const format of new Set(formats)) {
    if (format === 'csv') {
      contents.push([`${baseName}.csv`, tableToCsv(table)]);
      contents.push([
        `${baseName}.json`,
        `${JSON.stringify(csvSidecar(table, `${baseName}.csv`), null, 2)}\n`,
      ]);
    } else if (format === 'votable') contents.push([`${baseName}.vot`, tableToVotable(table)]);
    else if (format === 'fits') contents.push([`${baseName}.fits`, tableToFitsBintable(table)]);
    else throw new Error(`Unknown catalogue format "${String(format)}"; use csv, votable or fits.`);
  }
  await mkdir(dir, { recursive: true });
  const written: string[] = [];
  const temporary: string[] = [];
  try {
    for (const [name, content] of contents) {
      const path = join(dir, name);
      const partial = `${path}.partial-${process.pid}`;
      temporary.push(partial);
      await writeFile(partial, content);
    }
    for (const [index, [name]] of contents.entries()) {
      const path = join(dir, name);
      await rename(temporary[index]!, path);
      written.push(path);
    }
  } catch (error) {
    await Promise.all(temporary.map((path) => rm(path, { force: true })));
    throw error;
  }
  return written;
}

/** The command line's entry: the run's sources in each format; returns the paths written. */
export async function writeCatalogueFiles(
  dir: string,
  formats: readonly CatalogueFormat[],
  sources: readonly CatalogueSource[],
  provenance: CatalogueProvenance,
): Promise<string[]> {
  return writeTableFiles(dir, formats, sourcesToTable(sources, provenance));
}
