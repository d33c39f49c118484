// @vitest-environment node
/**
 * Issue 5, the quota helpers others call (run results): charges inside a transaction roll back with it, parallel
 * charges are serialised by the row lock, releases never go below zero.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { User } from '../../../server/models/user';
import { chargeQuota, precheckQuota, releaseQuota } from '../../../server/storage/quota';
import { createUser, startTestApp, type TestApp } from '../../support/test-app';

let t: TestApp;
beforeAll(async () => {
  t = await startTestApp();
});
afterAll(async () => {
  await t?.close();
});

const used = async (id: number) => (await User.query().findById(id))!.bytesUsed;

describe('chargeQuota / releaseQuota', () => {
  it('a charge rolls back with its transaction', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 10_000 });
    await expect(
      t.ctx.knex.transaction(async (trx) => {
        await chargeQuota(trx, user.id, 4000);
        throw new Error('the insert after the charge failed');
      }),
    ).rejects.toThrow('the insert after the charge failed');
    expect(await used(user.id)).toBe(0);
    await t.ctx.knex.transaction((trx) => chargeQuota(trx, user.id, 4000));
    expect(await used(user.id)).toBe(4000);
  });

  it('20 parallel charges of 1000 bytes against 5500 free: exactly 5 succeed', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 5500 });
    const outcomes = await Promise.allSettled(
      Array.from({ length: 20 }, () =>
        t.ctx.knex.transaction(async (trx) => {
          await chargeQuota(trx, user.id, 1000);
          // Hold the lock a moment, as an upload's inserts do.
          await new Promise((resolve) => setTimeout(resolve, 5));
        }),
      ),
    );
    expect(outcomes.filter((o) => o.status === 'fulfilled').length).toBe(5);
    const refused = outcomes.filter((o): o is PromiseRejectedResult => o.status === 'rejected');
    expect(refused.length).toBe(15);
    for (const r of refused) {
      expect(r.reason).toMatchObject({
        status: 413,
        code: 'payload_too_large',
        details: { usedBytes: 5000, quotaBytes: 5500, neededBytes: 1000 },
      });
    }
    expect(await used(user.id)).toBe(5000);
  });

  it('the message names used, quota, free and needed in human units', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 5 * 1024 ** 3 });
    await t.ctx
      .knex('users')
      .where('id', user.id)
      .update({ bytes_used: Math.round(4.5 * 1024 ** 3) });
    await expect(t.ctx.knex.transaction((trx) => chargeQuota(trx, user.id, 600 * 1024 ** 2))).rejects.toThrow(
      'Not enough storage: you use 4.5 GiB of your 5 GiB quota (512 MiB free) and this needs 600 MiB. ' +
        'Delete images or results you no longer need, or ask an administrator for a larger quota.',
    );
    await expect(precheckQuota(t.ctx.knex, user.id, 600 * 1024 ** 2)).rejects.toMatchObject({ status: 413 });
    await expect(precheckQuota(t.ctx.knex, user.id, 512 * 1024 ** 2)).resolves.toBeUndefined();
  });

  it('a release subtracts, never below zero; bad sizes and unknown accounts are refused', async () => {
    const user = await createUser(t.ctx, { quotaBytes: 10_000 });
    await t.ctx.knex.transaction((trx) => chargeQuota(trx, user.id, 3000));
    expect(await t.ctx.knex.transaction((trx) => releaseQuota(trx, user.id, 1000))).toEqual({
      quotaBytes: 10_000,
      bytesUsed: 2000,
    });
    await t.ctx.knex.transaction((trx) => releaseQuota(trx, user.id, 5000));
    expect(await used(user.id)).toBe(0);
    await expect(t.ctx.knex.transaction((trx) => chargeQuota(trx, user.id, -1))).rejects.toThrow(
      'bytes must be a non-negative integer, got -1',
    );
    await expect(t.ctx.knex.transaction((trx) => chargeQuota(trx, 999_999, 1))).rejects.toMatchObject({
      status: 404,
      message: 'That account does not exist.',
    });
  });
});
