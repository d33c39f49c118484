// @vitest-environment node
/**
 * The joint-runs migration reverses exactly: down removes run_images, run_image_components and the two runs
 * columns (and nothing else), up puts them back with the same columns, constraints and delete rules.
 */
import knexFactory, { type Knex } from 'knex';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import * as migration from '../../migrations/202612020810-create-joint-runs';
import { createTestDatabase, type TestDatabase } from '../support/test-database';

let db: TestDatabase;
let knex: Knex;

beforeAll(async () => {
  db = await createTestDatabase('joint_runs_migration');
  knex = knexFactory({ client: 'pg', connection: db.url });
});

afterAll(async () => {
  await knex?.destroy();
  await db?.drop();
});

const rows = async <T>(sql: string, bindings: string[] = []) =>
  ((await knex.raw(sql, bindings)) as { rows: T[] }).rows;

const tables = async () =>
  (
    await rows<{ table_name: string }>(
      "select table_name from information_schema.tables where table_schema = 'public' order by 1",
    )
  ).map((row) => row.table_name);

const columns = async (table: string) =>
  (
    await rows<object>(
      'select column_name, data_type, is_nullable, column_default from information_schema.columns where table_name = ? order by column_name',
      [table],
    )
  ).map((row) => JSON.stringify(row));

/** name, type and delete rule of every constraint on the runs tables. */
const constraints = async () =>
  (
    await rows<{ c: string }>(
      "select conrelid::regclass::text || ' ' || conname || ' ' || contype::text || ' ' || confdeltype::text as c from pg_constraint where conrelid::regclass::text in ('runs', 'run_images', 'run_image_components', 'run_components') order by 1",
    )
  ).map((row) => row.c);

const indexes = async () =>
  (
    await rows<{ indexname: string }>(
      "select indexname from pg_indexes where tablename in ('runs', 'run_images', 'run_image_components') order by 1",
    )
  ).map((row) => row.indexname);

describe('migration 202612020810-create-joint-runs', () => {
  it('goes down to the schema before it and up again to the same schema', async () => {
    const before = await tables();
    expect(before).toEqual(expect.arrayContaining(['run_images', 'run_image_components']));
    const runColumns = await columns('runs');
    expect(runColumns.join('\n')).toContain('"column_name":"kind"');
    const constraintsBefore = await constraints();
    expect(constraintsBefore).toEqual(
      expect.arrayContaining([
        'run_images run_images_run_id_foreign f c',
        'run_images run_images_image_id_foreign f c',
        'run_image_components run_image_components_run_id_foreign f c',
        expect.stringContaining('runs runs_kind_check c'),
      ]),
    );
    const indexesBefore = await indexes();
    const imageColumns = await columns('run_images');
    const planeColumns = await columns('run_image_components');

    await migration.down(knex);
    expect(await tables()).toEqual(
      before.filter((name) => name !== 'run_images' && name !== 'run_image_components'),
    );
    const downColumns = await columns('runs');
    expect(downColumns).toEqual(
      runColumns.filter(
        (c) => !c.includes('"column_name":"kind"') && !c.includes('"column_name":"joint_results"'),
      ),
    );
    expect((await constraints()).some((c) => c.includes('kind_check'))).toBe(false);

    await migration.up(knex);
    expect(await tables()).toEqual(before);
    expect(await columns('runs')).toEqual(runColumns);
    expect(await columns('run_images')).toEqual(imageColumns);
    expect(await columns('run_image_components')).toEqual(planeColumns);
    expect(await constraints()).toEqual(constraintsBefore);
    expect(await indexes()).toEqual(indexesBefore);
  });
});
