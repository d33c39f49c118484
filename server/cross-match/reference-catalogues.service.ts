/**
 * Reference catalogues of a project: preview how a file would be read (nothing stored), upload (read, charge the
 * project owner's quota and store in one transaction), list, read one, delete (the trigger of migration
 * 202612020730 gives the bytes back in the deleting transaction), and load one for matching.
 */
import type {
  ReferenceCatalogueDetail,
  ReferenceCatalogueSummary,
  ReferencePreview,
  ReferenceReadOptions,
} from '../../shared/cross-match';
import {
  type ColumnMapping,
  type ReferenceCatalogue as ReadCatalogue,
  type ReferenceEntry,
  guessColumnMapping,
  readReferenceCatalogue,
  readReferenceColumns,
  ReferenceCatalogueError,
} from '../catalogue/read-reference';
import { AppError, notFound } from '../http/app-error';
import { isoDate } from '../models/base-model';
import { ReferenceCatalogue } from '../models/reference-catalogue';
import type { User } from '../models/user';
import { chargeQuota, precheckQuota } from '../storage/quota';

export const referenceNotFoundMessage = 'Reference catalogue not found in this project.';

/** Most rejected rows listed one by one in the stored report (the count is always exact). */
export const MAX_REJECTED_LISTED = 200;
const SAMPLE_ENTRIES = 20;

const unprocessable = (message: string, details?: unknown) => new AppError('unprocessable', message, details);

/** The file's text: UTF-8 (BOM allowed); binary or compressed files are refused with a message saying what they are. */
export function catalogueText(bytes: Uint8Array): string {
  if (bytes.length === 0) throw unprocessable('The reference catalogue file is empty.');
  if (bytes[0] === 0x1f && bytes[1] === 0x8b)
    throw unprocessable('The file is gzip-compressed; unpack it and send the CSV or VOTable itself.');
  const head = Buffer.from(bytes.subarray(0, 80)).toString('latin1');
  if (head.startsWith('SIMPLE  =')) {
    throw unprocessable(
      'This is a FITS file; reference catalogues are read from CSV or VOTable (TABLEDATA). Save the table as CSV or VOTable.',
    );
  }
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(bytes);
  } catch {
    throw unprocessable(
      'The file is not UTF-8 text; a reference catalogue must be a CSV or VOTable text file.',
    );
  }
  if (text.includes('\u0000'))
    throw unprocessable(
      'The file holds binary data; a reference catalogue must be a CSV or VOTable text file.',
    );
  return text;
}

function readOptions(options: ReferenceReadOptions) {
  return {
    format: options.format,
    mapping: options.mapping as ColumnMapping | undefined,
    positions: options.positions,
    maxRejectedListed: MAX_REJECTED_LISTED,
  };
}

/** Reads the file with the options; a file-level problem becomes a 422 with the reader's message. */
export function readCatalogue(text: string, options: ReferenceReadOptions): ReadCatalogue {
  try {
    return readReferenceCatalogue(text, readOptions(options));
  } catch (error) {
    if (error instanceof ReferenceCatalogueError) throw unprocessable(error.message);
    throw error;
  }
}

/** Notes a person should see before relying on the mapping; `unsure` when a choice rests on names alone. */
function mappingNotes(
  catalogue: ReadCatalogue,
  given: ReferenceReadOptions['mapping'],
): { notes: string[]; unsure: boolean } {
  const notes: string[] = [];
  let unsure = false;
  const column = (name: string | undefined) => catalogue.columns.find((c) => c.name === name);
  if (catalogue.positions === 'sky') {
    const byUcd =
      column(catalogue.mapping.ra)?.ucd?.startsWith('pos.eq.ra') &&
      column(catalogue.mapping.dec)?.ucd?.startsWith('pos.eq.dec');
    if (!byUcd && !(given?.ra && given.dec)) {
      notes.push(
        `RA/Dec were recognised by column name only («${catalogue.mapping.ra}», «${catalogue.mapping.dec}»); check them, and that they are in degrees or sexagesimal.`,
      );
      unsure = true;
    }
  } else {
    notes.push(
      'Positions are pixel x/y (FITS 1-based): they can only be matched against runs of the image they were measured on.',
    );
    if (!(given?.x && given.y)) unsure = true;
  }
  if (catalogue.mapping.flux === undefined) {
    notes.push(
      'No flux column was recognised, so flux ratios cannot be computed; choose one if the file has fluxes.',
    );
    if (!given?.flux) unsure = true;
  }
  if (catalogue.mapping.id === undefined)
    notes.push('No id column was recognised: rows are named by their row number.');
  if (catalogue.rejectedCount > 0) {
    notes.push(
      `${catalogue.rejectedCount} of ${catalogue.rowsRead} rows cannot be read and would be left out (see the list).`,
    );
  }
  if (catalogue.entries.length === 0) unsure = true;
  return { notes, unsure };
}

/** How the file would be read with these options; stores nothing. */
export function previewCatalogue(
  bytes: Uint8Array,
  fileName: string | null,
  options: ReferenceReadOptions,
): ReferencePreview {
  const text = catalogueText(bytes);
  let table: ReturnType<typeof readReferenceColumns>;
  try {
    table = readReferenceColumns(text, { format: options.format, sampleRows: 10 });
  } catch (error) {
    if (error instanceof ReferenceCatalogueError) throw unprocessable(error.message);
    throw error;
  }
  const guessedMapping = guessColumnMapping(table.columns);
  const base = {
    fileName,
    format: table.format,
    fileBytes: bytes.length,
    columns: table.columns,
    sampleRows: table.rows,
    guessedMapping,
  };
  let catalogue: ReadCatalogue;
  try {
    catalogue = readReferenceCatalogue(text, readOptions(options));
  } catch (error) {
    if (!(error instanceof ReferenceCatalogueError)) throw error;
    return {
      ...base,
      mapping: null,
      positions: null,
      problem: error.message,
      notes: [],
      unsure: true,
      rowsRead: table.rowCount,
      rowsRejected: 0,
      rejected: [],
      sampleEntries: [],
    };
  }
  const { notes, unsure } = mappingNotes(catalogue, options.mapping);
  return {
    ...base,
    mapping: catalogue.mapping,
    positions: catalogue.positions,
    problem: catalogue.entries.length === 0 ? noRowsMessage(catalogue) : null,
    notes,
    unsure,
    rowsRead: catalogue.rowsRead,
    rowsRejected: catalogue.rejectedCount,
    rejected: catalogue.rejected,
    sampleEntries: catalogue.entries.slice(0, SAMPLE_ENTRIES),
  };
}

function noRowsMessage(catalogue: ReadCatalogue): string {
  if (catalogue.rowsRead === 0) return 'The file has a header but no data rows.';
  const reasons = catalogue.rejected
    .slice(0, 3)
    .map((row) => `row ${row.row}: ${row.reason}`)
    .join('; ');
  return `None of the ${catalogue.rowsRead} rows could be read with these columns (${reasons}). Check the column choice.`;
}

type SummaryRow = ReferenceCatalogue & { uploaderName?: string | null; entryCount?: number };

const summaryColumns = [
  'reference_catalogues.id',
  'reference_catalogues.projectId',
  'reference_catalogues.uploadedById',
  'reference_catalogues.name',
  'reference_catalogues.originalFileName',
  'reference_catalogues.format',
  'reference_catalogues.positions',
  'reference_catalogues.mapping',
  'reference_catalogues.columns',
  'reference_catalogues.rowsRead',
  'reference_catalogues.rowsRejected',
  'reference_catalogues.bytes',
  'reference_catalogues.createdAt',
];

function toSummary(row: SummaryRow): ReferenceCatalogueSummary {
  return {
    id: row.id,
    projectId: row.projectId,
    name: row.name,
    originalFileName: row.originalFileName,
    format: row.format,
    positions: row.positions,
    mapping: row.mapping,
    columns: row.columns,
    rowsRead: row.rowsRead,
    rowsRejected: row.rowsRejected,
    entryCount: row.rowsRead - row.rowsRejected,
    bytes: row.bytes,
    uploadedBy:
      row.uploadedById === null ? null : { id: row.uploadedById, displayName: row.uploaderName ?? '' },
    createdAt: isoDate(row.createdAt),
  };
}

function summaryQuery() {
  return ReferenceCatalogue.query()
    .select(...summaryColumns, 'users.displayName as uploaderName')
    .leftJoin('users', 'users.id', 'reference_catalogues.uploadedById');
}

/** The name without its last extension, or the whole name. */
const baseName = (fileName: string) => fileName.replace(/\.[^./\\]+$/, '') || fileName;

/**
 * Reads and stores a reference catalogue for `user` in the project. Order: quota pre-check without a lock (413
 * before reading), read (422), then ONE transaction: lock the quota owner's row, check and charge (413), insert
 * the catalogue and its contents. A failure anywhere leaves no row and no charge.
 */
export async function uploadCatalogue(
  user: User,
  project: { id: number; ownerId: number | null },
  bytes: Buffer,
  fileName: string | null,
  options: ReferenceReadOptions,
): Promise<ReferenceCatalogueDetail> {
  const chargedUserId = project.ownerId ?? user.id;
  await precheckQuota(ReferenceCatalogue.knex(), chargedUserId, bytes.length);
  const text = catalogueText(bytes);
  const catalogue = readCatalogue(text, options);
  if (catalogue.entries.length === 0) throw unprocessable(noRowsMessage(catalogue));
  const entriesJson = JSON.stringify(catalogue.entries);
  const stored = bytes.length + Buffer.byteLength(entriesJson);
  const originalFileName = (options.fileName ?? fileName ?? 'catalogue').slice(0, 1000);
  const name = (options.name ?? baseName(originalFileName)).trim().slice(0, 200) || 'reference catalogue';
  const id = await ReferenceCatalogue.transaction(async (trx) => {
    await chargeQuota(trx, chargedUserId, stored);
    const row = await ReferenceCatalogue.query(trx).insert({
      projectId: project.id,
      uploadedById: user.id,
      chargedUserId,
      name,
      originalFileName,
      format: catalogue.format,
      positions: catalogue.positions,
      mapping: catalogue.mapping,
      columns: catalogue.columns,
      rowsRead: catalogue.rowsRead,
      rowsRejected: catalogue.rejectedCount,
      rejected: catalogue.rejected,
      bytes: stored,
    });
    await trx('reference_catalogue_contents').insert({
      referenceCatalogueId: row.id,
      original: bytes,
      entries: entriesJson,
    });
    return row.id;
  });
  return catalogueDetail(project.id, id);
}

export async function listCatalogues(projectId: number): Promise<ReferenceCatalogueSummary[]> {
  const rows = (await summaryQuery().modify('ofProject', projectId)) as SummaryRow[];
  return rows.map(toSummary);
}

export async function catalogueDetail(projectId: number, id: number): Promise<ReferenceCatalogueDetail> {
  const row = (await summaryQuery()
    .select('reference_catalogues.rejected')
    .where({ 'reference_catalogues.id': id, 'reference_catalogues.projectId': projectId })
    .first()) as SummaryRow | undefined;
  if (!row) throw notFound(referenceNotFoundMessage);
  const sample = (await ReferenceCatalogue.knex()
    .raw(
      `select coalesce(jsonb_agg(e.value order by e.ordinality), '[]'::jsonb) as entries
       from reference_catalogue_contents c,
            jsonb_array_elements(c.entries) with ordinality as e(value, ordinality)
       where c.reference_catalogue_id = ? and e.ordinality <= ?`,
      [id, SAMPLE_ENTRIES],
    )
    .then(
      (result: { rows: { entries: ReferenceEntry[] }[] }) => result.rows[0]?.entries ?? [],
    )) as ReferenceEntry[];
  return { ...toSummary(row), rejected: row.rejected, sampleEntries: sample };
}

/** Deletes the catalogue and its contents; the trigger gives its bytes back to the charged account. */
export async function deleteCatalogue(projectId: number, id: number): Promise<void> {
  await ReferenceCatalogue.transaction(async (trx) => {
    const deleted = await ReferenceCatalogue.query(trx).delete().where({ id, projectId });
    if (deleted === 0) throw notFound(referenceNotFoundMessage);
  });
}

/** A stored catalogue as the reader returned it, plus its name and original text, for matching. */
export async function loadForMatching(
  projectId: number,
  id: number,
): Promise<{ row: ReferenceCatalogue; catalogue: ReadCatalogue; originalText: () => string }> {
  const row = await ReferenceCatalogue.query().findOne({ id, projectId });
  if (!row) throw notFound(referenceNotFoundMessage);
  const contents = (await ReferenceCatalogue.knex()('reference_catalogue_contents')
    .where('referenceCatalogueId', id)
    .first('entries', 'original')) as { entries: ReferenceEntry[]; original: Buffer } | undefined;
  if (!contents) throw notFound(referenceNotFoundMessage);
  return {
    row,
    catalogue: {
      format: row.format,
      positions: row.positions,
      columns: row.columns,
      mapping: row.mapping,
      entries: contents.entries,
      rejected: row.rejected,
      rejectedCount: row.rowsRejected,
      rowsRead: row.rowsRead,
    },
    originalText: () => contents.original.toString('utf8'),
  };
}
