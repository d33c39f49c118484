import type { Knex } from 'knex';

/** Personal API tokens; only the SHA-256 of the token is stored. */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('api_tokens', (table) => {
    table.increments('id');
    table.integer('user_id').notNullable().references('id').inTable('users').onDelete('CASCADE');
    table.text('name').notNullable();
    table.text('prefix').notNullable();
    table.text('token_hash').notNullable().unique({ indexName: 'api_tokens_token_hash_unique' });
    table.timestamp('last_used_at', { useTz: true }).nullable();
    table.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['user_id'], 'api_tokens_user_id_index');
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('api_tokens');
}
