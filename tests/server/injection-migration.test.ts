// @vitest-environment node
/**
 * The injection-study migration reverses exactly: down removes both tables (and nothing else), up puts them back
 * with their columns, constraints and cascades.
 */
import knexFactory, { type Knex } from 'knex';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import * as migration from '../../migrations/202612020745-create-injection-studies';
import { createTestDatabase, type TestDatabase } from '../support/test-database';

let db: TestDatabase;
let knex: Knex;

beforeAll(async () => {
  db = await createTestDatabase('injection_migration');
  knex = knexFactory({ client: 'pg', connection: db.url });
});

afterAll(async () => {
  await knex?.destroy();
  await db?.drop();
});

const tables = async () =>
  (
    (
      await knex.raw(
        "select table_name from information_schema.tables where table_schema = 'public' order by 1",
      )
    ).rows as { table_name: string }[]
  ).map((row) => row.table_name);

const columns = async (table: string) =>
  (
    (
      await knex.raw(
        'select column_name, data_type, is_nullable from information_schema.columns where table_name = ? order by column_name',
        [table],
      )
    ).rows as object[]
  ).map((row) => JSON.stringify(row));

/** name, type and delete rule ('c' cascade, 'n' set null) of every constraint on the two tables. */
const constraints = async () =>
  (
    (
      await knex.raw(
        "select conname || ' ' || contype::text || ' ' || confdeltype::text as c from pg_constraint where conrelid in ('injection_studies'::regclass, 'injection_trials'::regclass) order by 1",
      )
    ).rows as { c: string }[]
  ).map((row) => row.c);

describe('migration 202612020745-create-injection-studies', () => {
  it('goes down to the tables before it and up again to the same columns', async () => {
    const before = await tables();
    expect(before).toEqual(expect.arrayContaining(['injection_studies', 'injection_trials']));
    const studyColumns = await columns('injection_studies');
    const trialColumns = await columns('injection_trials');
    const constraintsBefore = await constraints();
    expect(constraintsBefore).toEqual(
      expect.arrayContaining([
        expect.stringContaining('injection_studies_status_check'),
        expect.stringContaining('injection_trials_study_id_foreign f c'),
      ]),
    );
    await migration.down(knex);
    const down = await tables();
    expect(down).toEqual(before.filter((name) => !name.startsWith('injection_')));
    await migration.up(knex);
    expect(await tables()).toEqual(before);
    expect(await columns('injection_studies')).toEqual(studyColumns);
    expect(await columns('injection_trials')).toEqual(trialColumns);
    // The status checks, foreign keys (with their delete rules) and the unique trial index are back too.
    expect(await constraints()).toEqual(constraintsBefore);
  });
});
