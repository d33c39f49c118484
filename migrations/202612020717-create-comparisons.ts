import type { Knex } from 'knex';

/**
 * Saved comparisons of 2–4 finished runs of one image: a name, the component shown side by side, and the runs in
 * the order chosen (comparison_runs.position 0…3). A comparison belongs to a project (deleted with it) and to the
 * image its runs share (deleted with it). Deleting a run removes it from its comparisons (a comparison left with
 * fewer runs than `run_count` says so when read).
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('comparisons', (table) => {
    table.increments('id');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.integer('image_id').notNullable().references('id').inTable('images').onDelete('CASCADE');
    table.text('name').notNullable();
    table.text('component').notNullable().defaultTo('diffuse');
    /** How many runs the comparison was saved with (runs deleted later leave it with fewer). */
    table.smallint('run_count').notNullable();
    table.integer('created_by').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.timestamp('updated_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['project_id', 'created_at'], 'comparisons_project_id_index');
    table.index(['image_id'], 'comparisons_image_id_index');
    table.index(['created_by'], 'comparisons_created_by_index');
  });
  await knex.raw(
    "alter table comparisons add constraint comparisons_component_check check (component in ('diffuse', 'diffuseSky', 'compact', 'compactSky', 'model', 'residual', 'residualNorm'))",
  );
  await knex.raw(
    'alter table comparisons add constraint comparisons_run_count_check check (run_count between 2 and 4)',
  );

  await knex.schema.createTable('comparison_runs', (table) => {
    table.integer('comparison_id').notNullable().references('id').inTable('comparisons').onDelete('CASCADE');
    table.integer('run_id').notNullable().references('id').inTable('runs').onDelete('CASCADE');
    table.smallint('position').notNullable();
    table.primary(['comparison_id', 'position'], { constraintName: 'comparison_runs_pkey' });
    table.unique(['comparison_id', 'run_id'], { indexName: 'comparison_runs_comparison_id_run_id_unique' });
    table.index(['run_id'], 'comparison_runs_run_id_index');
  });
  await knex.raw(
    'alter table comparison_runs add constraint comparison_runs_position_check check (position between 0 and 3)',
  );
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('comparison_runs');
  await knex.schema.dropTable('comparisons');
}
