import type { Knex } from 'knex';

/** Invitations of e-mail addresses without an account; they join the project when that address signs up. */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('invitations', (table) => {
    table.increments('id');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.text('email').notNullable();
    table.text('role').notNullable();
    table.text('token_hash').notNullable().unique({ indexName: 'invitations_token_hash_unique' });
    table.integer('invited_by_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.timestamp('expires_at', { useTz: true }).notNullable();
    table.timestamp('accepted_at', { useTz: true }).nullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['project_id'], 'invitations_project_id_index');
    table.index(['invited_by_id'], 'invitations_invited_by_id_index');
    table.check("role in ('editor', 'viewer')", [], 'invitations_role_check');
  });
  await knex.raw('create index invitations_email_lower_index on invitations (lower(email))');
  // At most one pending invitation per address and project.
  await knex.raw(
    'create unique index invitations_pending_unique on invitations (project_id, lower(email)) where accepted_at is null',
  );
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('invitations');
}
