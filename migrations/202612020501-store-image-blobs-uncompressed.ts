import type { Knex } from 'knex';

/**
 * Image blobs are stored out of line without compression (STORAGE EXTERNAL): float32 noise and most originals
 * hardly compress, and PostgreSQL's pglz pass cost about half the time of writing and reading a 64 MiB plane.
 * The thumbnail (small PNG, already deflated) keeps the default.
 */
const columns = ['original', 'pixels', 'mask'];

export async function up(knex: Knex): Promise<void> {
  for (const column of columns)
    await knex.raw(`alter table image_blobs alter column ?? set storage external`, [column]);
}

export async function down(knex: Knex): Promise<void> {
  for (const column of columns)
    await knex.raw(`alter table image_blobs alter column ?? set storage extended`, [column]);
}
