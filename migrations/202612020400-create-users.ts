import type { Knex } from 'knex';

/** Accounts. E-mail is unique case-insensitively (unique index on lower(email)). */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('users', (table) => {
    table.increments('id');
    table.text('email').notNullable();
    table.text('display_name').notNullable();
    table.text('password_hash').notNullable();
    table.text('role').notNullable().defaultTo('member');
    table.bigInteger('quota_bytes').notNullable();
    table.bigInteger('bytes_used').notNullable().defaultTo(0);
    table.boolean('disabled').notNullable().defaultTo(false);
    table.boolean('email_on_run_finish').notNullable().defaultTo(true);
    table.timestamp('last_sign_in_at', { useTz: true }).nullable();
    table.timestamps(true, true);
    table.check("role in ('admin', 'member')", [], 'users_role_check');
    table.check('quota_bytes >= 0', [], 'users_quota_bytes_check');
    table.check('bytes_used >= 0', [], 'users_bytes_used_check');
  });
  await knex.raw('create unique index users_email_lower_unique on users (lower(email))');
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('users');
}
