import type { Knex } from 'knex';

/**
 * Joint runs: one separation fitted to several images of one project at once (server/engine/joint).
 * - runs.kind: 'single' (every run before this migration) or 'joint'; runs.image_id stays the reference image
 *   (position 1), so everything that reads a run's image keeps working; runs.joint_results holds what only a
 *   joint run has (flux-scale factors with errors, per-image noise/PSF/unit, the common grid, warnings).
 * - run_images: the input images of a joint run by position (1 = reference, up to 4), with per-image options
 *   (PSF, σ, likelihood, unit overrides).
 * - run_image_components: the component planes of images 2…n of a joint run (image 1's planes and the
 *   common-grid sky fields stay in run_components, so readers of a run's planes see the reference's).
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable('runs', (table) => {
    table.text('kind').notNullable().defaultTo('single');
    table.jsonb('joint_results').nullable();
  });
  await knex.raw("alter table runs add constraint runs_kind_check check (kind in ('single', 'joint'))");

  await knex.schema.createTable('run_images', (table) => {
    table.integer('run_id').notNullable().references('id').inTable('runs').onDelete('CASCADE');
    table.integer('image_id').notNullable().references('id').inTable('images').onDelete('CASCADE');
    table.integer('position').notNullable();
    table.jsonb('options').notNullable().defaultTo('{}');
    table.primary(['run_id', 'position'], { constraintName: 'run_images_pkey' });
    table.unique(['run_id', 'image_id'], { indexName: 'run_images_run_id_image_id_unique' });
    table.index(['image_id'], 'run_images_image_id_index');
  });
  await knex.raw(
    'alter table run_images add constraint run_images_position_check check (position between 1 and 4)',
  );

  await knex.schema.createTable('run_image_components', (table) => {
    table.increments('id');
    table.integer('run_id').notNullable().references('id').inTable('runs').onDelete('CASCADE');
    table.integer('position').notNullable();
    table.text('name').notNullable();
    table.integer('width').notNullable();
    table.integer('height').notNullable();
    table.binary('data').notNullable();
    table.bigInteger('byte_size').notNullable();
    table.unique(['run_id', 'position', 'name'], { indexName: 'run_image_components_unique' });
  });
  await knex.raw(
    'alter table run_image_components add constraint run_image_components_position_check check (position between 2 and 4)',
  );
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('run_image_components');
  await knex.schema.dropTable('run_images');
  await knex.raw('alter table runs drop constraint runs_kind_check');
  await knex.schema.alterTable('runs', (table) => {
    table.dropColumn('joint_results');
    table.dropColumn('kind');
  });
}
