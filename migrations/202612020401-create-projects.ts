import type { Knex } from 'knex';

/** Projects and their memberships (role owner | editor | viewer per user and project). */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('projects', (table) => {
    table.increments('id');
    table.text('name').notNullable();
    table.text('description').notNullable().defaultTo('');
    table.integer('owner_id').nullable().references('id').inTable('users').onDelete('SET NULL');
    table.timestamps(true, true);
    table.index(['owner_id'], 'projects_owner_id_index');
  });
  await knex.schema.createTable('memberships', (table) => {
    table.increments('id');
    table.integer('project_id').notNullable().references('id').inTable('projects').onDelete('CASCADE');
    table.integer('user_id').notNullable().references('id').inTable('users').onDelete('CASCADE');
    table.text('role').notNullable();
    table.timestamps(true, true);
    table.unique(['project_id', 'user_id'], { indexName: 'memberships_project_user_unique' });
    table.index(['user_id'], 'memberships_user_id_index');
    table.check("role in ('owner', 'editor', 'viewer')", [], 'memberships_role_check');
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('memberships');
  await knex.schema.dropTable('projects');
}
