import type { Knex } from 'knex';

/** Messages received by the in-process development SMTP receiver (development and tests only). */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('dev_mail', (table) => {
    table.increments('id');
    table.text('envelope_from').notNullable();
    table.text('envelope_to').notNullable();
    table.text('from_header').notNullable().defaultTo('');
    table.text('to_header').notNullable().defaultTo('');
    table.text('subject').notNullable().defaultTo('');
    table.text('text').notNullable().defaultTo('');
    table.text('html').nullable();
    table.text('raw').notNullable();
    table.timestamp('received_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    table.index(['received_at'], 'dev_mail_received_at_index');
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable('dev_mail');
}
