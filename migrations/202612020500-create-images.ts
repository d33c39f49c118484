import type { Knex } from 'knex';

/**
 * Images of a project. Metadata (header cards, WCS, statistics) in `images`; the large byte strings (original
 * file, float32 plane, mask, thumbnail) in `image_blobs`, one row per image, so list queries never touch them.
 *
 * Quota: `file_bytes` of an image is charged to `uploaded_by_id`'s `users.bytes_used` by the upload transaction
 * (server/storage/quota.ts, under a row lock). Releasing is done by a trigger after every delete of an image row,
 * whatever deletes it (the image route, or the cascade when its project is deleted), in the same transaction.
 * The trigger function is generic: `release_storage_on_delete('<user id column>', '<bytes column>')`, so other
 * tables with charged bytes (run results) can attach it too. It reads the row through to_jsonb(OLD): attach it
 * only to tables without large columns.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('images', (table) => {
    table.increments('id');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.integer('uploaded_by_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.text('name').notNullable();
    table.text('original_file_name').notNullable();
    table.text('format').notNullable();
    table.boolean('gzipped').notNullable().defaultTo(false);
    table.text('content_sha256').notNullable();
    table.bigInteger('file_bytes').notNullable();
    table.integer('width').notNullable();
    table.integer('height').notNullable();
    table.integer('plane').nullable();
    table.jsonb('original_axes').notNullable();
    table.text('unit').nullable();
    table.jsonb('header').notNullable();
    table.jsonb('wcs').nullable();
    table.jsonb('beam').nullable();
    table.jsonb('statistics').notNullable();
    table.jsonb('noise').nullable();
    table.jsonb('warnings').notNullable();
    table.timestamps(true, true);
    table.unique(['project_id', 'content_sha256'], { indexName: 'images_project_sha256_unique' });
    table.index(['uploaded_by_id'], 'images_uploaded_by_id_index');
    table.check("format in ('fits', 'tiff', 'png', 'jpeg')", [], 'images_format_check');
    table.check('file_bytes >= 0', [], 'images_file_bytes_check');
    table.check('width > 0 and height > 0', [], 'images_size_check');
  });
  await knex.schema.createTable('image_blobs', (table) => {
    table.integer('image_id').primary().references('id').inTable('images').onDelete('CASCADE');
    table.binary('original').notNullable();
    /** width × height float32, little-endian, row 0 = FITS y = 1; blank pixels hold 0. */
    table.binary('pixels').notNullable();
    /** width × height bytes, 1 = valid, 0 = blank. */
    table.binary('mask').notNullable();
    table.binary('thumbnail').notNullable();
  });
  await knex.raw(`
    create function release_storage_on_delete() returns trigger language plpgsql as $$
    declare
      owner_id integer := (to_jsonb(old) ->> tg_argv[0])::integer;
      released bigint := coalesce((to_jsonb(old) ->> tg_argv[1])::bigint, 0);
    begin
      if owner_id is not null and released > 0 then
        update users set bytes_used = greatest(bytes_used - released, 0) where id = owner_id;
      end if;
      return old;
    end
    $$`);
  await knex.raw(`
    create trigger images_release_storage after delete on images
    for each row execute function release_storage_on_delete('uploaded_by_id', 'file_bytes')`);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw('drop trigger images_release_storage on images');
  await knex.raw('drop function release_storage_on_delete()');
  await knex.schema.dropTable('image_blobs');
  await knex.schema.dropTable('images');
}
