import type { Knex } from 'knex';

/**
 * Completeness-and-reliability studies by injection, and their trials.
 * A study belongs to a finished run (and its project): the flux or SNR levels asked for and the fluxes they
 * resolved to, how many artificial sources per level, the seed of the positions, the exclusion radius, its
 * status and progress, the aggregated results and why it failed. A trial is one queued separation of one
 * trial image: an image with artificial sources added (kind `injection`), or the image with the run's compact
 * model subtracted (kind `false-source`); it keeps what was injected and what the separation recovered.
 * Trials store no planes (only the per-source outcome), so a study charges no storage quota.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('injection_studies', (table) => {
    table.increments('id');
    table.integer('run_id').notNullable().references('id').inTable('runs').onDelete('CASCADE');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.integer('created_by').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.text('level_kind').notNullable();
    /** The levels as asked for (SNR or flux), one entry per level. */
    table.jsonb('levels').notNullable();
    /** The injected flux of each level (image units × pixels). */
    table.jsonb('fluxes').notNullable();
    table.integer('sources_per_level').notNullable();
    table.bigInteger('seed').notNullable();
    /** Minimum distance of an artificial source to a detected one, to another artificial one and to the edge. */
    table.double('radius_pixels').notNullable();
    table.double('match_radius_pixels').notNullable();
    table.text('status').notNullable().defaultTo('queued');
    table.boolean('cancel_requested').notNullable().defaultTo(false);
    table.integer('trials_total').notNullable().defaultTo(0);
    table.integer('trials_done').notNullable().defaultTo(0);
    table.jsonb('results').nullable();
    table.text('error_message').nullable();
    table.timestamp('started_at', { useTz: true }).nullable();
    table.timestamp('finished_at', { useTz: true }).nullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.timestamp('updated_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['run_id', 'created_at'], 'injection_studies_run_id_index');
    table.index(['project_id'], 'injection_studies_project_id_index');
    table.index(['created_by'], 'injection_studies_created_by_index');
  });
  await knex.raw(
    "alter table injection_studies add constraint injection_studies_status_check check (status in ('queued', 'running', 'succeeded', 'failed', 'cancelled'))",
  );
  await knex.raw(
    "alter table injection_studies add constraint injection_studies_level_kind_check check (level_kind in ('snr', 'flux'))",
  );

  await knex.schema.createTable('injection_trials', (table) => {
    table.increments('id');
    table.integer('study_id').notNullable().references('id').inTable('injection_studies').onDelete('CASCADE');
    table.integer('trial_index').notNullable();
    table.text('kind').notNullable();
    /** Index of the flux level (null for the false-source trial). */
    table.integer('level').nullable();
    table.text('status').notNullable().defaultTo('queued');
    table.integer('attempts').notNullable().defaultTo(0);
    table.uuid('job_id').nullable();
    table.bigInteger('seed').nullable();
    /** The artificial sources: [{ x, y, level, flux }] in FITS pixels. */
    table.jsonb('injected').notNullable();
    /** What the separation of this trial image found (outcomes per injected source, or the detections). */
    table.jsonb('recovered').nullable();
    table.text('error_message').nullable();
    table.timestamp('started_at', { useTz: true }).nullable();
    table.timestamp('finished_at', { useTz: true }).nullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.timestamp('updated_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.unique(['study_id', 'trial_index'], { indexName: 'injection_trials_study_id_trial_index_unique' });
  });
  await knex.raw(
    "alter table injection_trials add constraint injection_trials_status_check check (status in ('queued', 'running', 'succeeded', 'failed', 'cancelled'))",
  );
  await knex.raw(
    "alter table injection_trials add constraint injection_trials_kind_check check (kind in ('injection', 'false-source'))",
  );
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('injection_trials');
  await knex.schema.dropTable('injection_studies');
}
