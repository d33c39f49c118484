import type { Knex } from 'knex';

/**
 * Reference catalogues of a project (CSV or VOTable files uploaded to cross-match runs against).
 * `reference_catalogues` holds what lists and details show (name, format, the column mapping used, the counts of
 * rows read and rejected, the rejected-row report); the large parts (the original file and the entries read from
 * it) sit in `reference_catalogue_contents`, one row per catalogue, so list queries never touch them.
 *
 * Quota: `bytes` (original file + stored entries) is charged to `charged_user_id` (the project's owner at upload
 * time) by the upload transaction (server/storage/quota.ts, under a row lock). Deleting a catalogue row, by the
 * route or by the cascade when its project goes, gives the bytes back through the generic trigger function of
 * migration 202612020500, in the same transaction.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('reference_catalogues', (table) => {
    table.increments('id');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.integer('uploaded_by_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.integer('charged_user_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.text('name').notNullable();
    table.text('original_file_name').notNullable();
    table.text('format').notNullable();
    table.text('positions').notNullable();
    table.jsonb('mapping').notNullable();
    table.jsonb('columns').notNullable();
    table.integer('rows_read').notNullable();
    table.integer('rows_rejected').notNullable();
    table.jsonb('rejected').notNullable();
    table.bigInteger('bytes').notNullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['project_id', 'created_at'], 'reference_catalogues_project_id_index');
    table.index(['uploaded_by_id'], 'reference_catalogues_uploaded_by_id_index');
    table.index(['charged_user_id'], 'reference_catalogues_charged_user_id_index');
    table.check("format in ('csv', 'votable')", [], 'reference_catalogues_format_check');
    table.check("positions in ('sky', 'pixel')", [], 'reference_catalogues_positions_check');
    table.check(
      'rows_read >= 0 and rows_rejected >= 0 and rows_rejected <= rows_read',
      [],
      'reference_catalogues_rows_check',
    );
    table.check('bytes >= 0', [], 'reference_catalogues_bytes_check');
  });
  await knex.schema.createTable('reference_catalogue_contents', (table) => {
    table
      .integer('reference_catalogue_id')
      .primary()
      .references('id')
      .inTable('reference_catalogues')
      .onDelete('CASCADE');
    /** The file as uploaded. */
    table.binary('original').notNullable();
    /** The entries read from it (row, id, ra, dec, x, y, flux), in file order. */
    table.jsonb('entries').notNullable();
  });
  await knex.raw(`
    create trigger reference_catalogues_release_storage after delete on reference_catalogues
    for each row execute function release_storage_on_delete('charged_user_id', 'bytes')`);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw('drop trigger reference_catalogues_release_storage on reference_catalogues');
  await knex.schema.dropTable('reference_catalogue_contents');
  await knex.schema.dropTable('reference_catalogues');
}
