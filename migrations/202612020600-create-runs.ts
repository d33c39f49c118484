import type { Knex } from 'knex';

/**
 * Separation runs, their source rows and their component planes.
 * A run belongs to an image (and its project); it keeps the settings as sent and after defaults, its progress,
 * why it failed, and once finished its provenance and diagnostics. Sources are real rows (sortable and filterable
 * by SNR, flux and position); component planes are float32 little-endian blobs, one row per plane.
 * Result bytes (planes + source rows) are charged to `charged_user_id` when the results are stored.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('runs', (table) => {
    table.increments('id');
    table.integer('image_id').notNullable().references('id').inTable('images').onDelete('CASCADE');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.integer('created_by').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.text('status').notNullable().defaultTo('queued');
    table.jsonb('requested_settings').notNullable();
    table.jsonb('settings').notNullable();
    table.text('settings_digest').notNullable();
    table.jsonb('progress').nullable();
    table.text('error_message').nullable();
    table.integer('attempts').notNullable().defaultTo(0);
    table.boolean('cancel_requested').notNullable().defaultTo(false);
    table.uuid('job_id').nullable();
    table.integer('source_count').nullable();
    table.jsonb('phases_ms').nullable();
    table.jsonb('provenance').nullable();
    table.jsonb('diagnostics').nullable();
    table.bigInteger('result_bytes').notNullable().defaultTo(0);
    /** Whose quota the result bytes are charged to (the image's uploader at the time the results were stored). */
    table.integer('charged_user_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.timestamp('started_at', { useTz: true }).nullable();
    table.timestamp('finished_at', { useTz: true }).nullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.timestamp('updated_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['image_id', 'created_at'], 'runs_image_id_index');
    table.index(['project_id'], 'runs_project_id_index');
    table.index(['created_by'], 'runs_created_by_index');
    table.index(['status'], 'runs_status_index');
    table.index(['charged_user_id'], 'runs_charged_user_id_index');
  });
  // Deleting a run (or its image or project, by cascade) gives its result bytes back, in the same transaction
  // (the generic trigger function of migration 202612020500).
  await knex.raw(`
    create trigger runs_release_storage after delete on runs
    for each row execute function release_storage_on_delete('charged_user_id', 'result_bytes')`);
  await knex.raw(
    "alter table runs add constraint runs_status_check check (status in ('queued', 'running', 'succeeded', 'failed', 'cancelled'))",
  );

  await knex.schema.createTable('run_sources', (table) => {
    table.integer('run_id').notNullable().references('id').inTable('runs').onDelete('CASCADE');
    table.integer('source_id').notNullable();
    table.double('x').notNullable();
    table.double('y').notNullable();
    table.double('x_err').notNullable();
    table.double('y_err').notNullable();
    table.double('ra').nullable();
    table.double('dec').nullable();
    table.double('ra_err_arcsec').nullable();
    table.double('dec_err_arcsec').nullable();
    table.double('flux').notNullable();
    table.double('flux_err').notNullable();
    table.double('flux_density').nullable();
    table.double('flux_density_err').nullable();
    table.double('snr').notNullable();
    table.double('significance').nullable();
    table.specificType('flags', 'text[]').notNullable().defaultTo('{}');
    table.primary(['run_id', 'source_id'], { constraintName: 'run_sources_pkey' });
    table.index(['run_id', 'snr'], 'run_sources_snr_index');
    table.index(['run_id', 'flux'], 'run_sources_flux_index');
    table.index(['run_id', 'ra', 'dec'], 'run_sources_sky_index');
    table.index(['run_id', 'x', 'y'], 'run_sources_pixel_index');
  });

  await knex.schema.createTable('run_components', (table) => {
    table.increments('id');
    table.integer('run_id').notNullable().references('id').inTable('runs').onDelete('CASCADE');
    table.text('name').notNullable();
    table.integer('width').notNullable();
    table.integer('height').notNullable();
    table.binary('data').notNullable();
    table.bigInteger('byte_size').notNullable();
    table.unique(['run_id', 'name'], { indexName: 'run_components_run_id_name_unique' });
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('run_components');
  await knex.schema.dropTable('run_sources');
  await knex.raw('drop trigger runs_release_storage on runs');
  await knex.schema.dropTable('runs');
}
