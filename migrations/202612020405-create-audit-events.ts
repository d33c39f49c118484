import type { Knex } from 'knex';

/** The security audit log: who did what to which object, when, from which address. */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('audit_events', (table) => {
    table.bigIncrements('id');
    table.text('action').notNullable();
    table.integer('actor_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.text('target_type').nullable();
    // No foreign key: the log outlives the objects it mentions (a deleted project keeps its history).
    table.integer('target_id').nullable();
    table.jsonb('details').notNullable().defaultTo('{}');
    table.text('ip').nullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['actor_id'], 'audit_events_actor_id_index');
    table.index(['action'], 'audit_events_action_index');
    table.index(['target_type', 'target_id'], 'audit_events_target_index');
    table.index(['created_at'], 'audit_events_created_at_index');
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('audit_events');
}
