import type { Knex } from 'knex';

/** The express-session store table, in the schema connect-pg-simple 10 expects (its table.sql). */
export async function up(knex: Knex): Promise<void> {
  await knex.raw(`
    create table "session" (
      "sid" varchar not null collate "default" primary key,
      "sess" json not null,
      "expire" timestamp(6) not null
    )`);
  await knex.raw('create index "IDX_session_expire" on "session" ("expire")');
  // Sign-out everywhere (disabled account, password reset) deletes a user's sessions by this key.
  await knex.raw(`create index session_user_index on "session" ((("sess"->'passport'->>'user')))`);
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('session');
}
