/**
 * The storage quota counter `users.bytes_used`. Every charge runs inside the caller's transaction and locks the
 * user's row (SELECT … FOR UPDATE) before it checks and adds, so parallel uploads (or run results) of one account
 * are serialised on that row and can never end above the quota; if the transaction rolls back, so does the charge.
 *
 * Use: `await knex.transaction(async (trx) => { await chargeQuota(trx, userId, bytes); …insert the rows… })`.
 * Releasing: rows of `images` release their bytes by a trigger when deleted (migration 202612020500);
 * other stored results call `releaseQuota` in the transaction that deletes them (or attach the same trigger).
 */
import type { Knex } from 'knex';

import { formatBytes } from '../engine/io/sky-image';
import { AppError, notFound } from '../http/app-error';

export interface QuotaState {
  quotaBytes: number;
  bytesUsed: number;
}

/** Details of a 413 over-quota answer (also in the error body's `details`). */
export interface QuotaExceededDetails {
  usedBytes: number;
  quotaBytes: number;
  neededBytes: number;
}

export function quotaExceededMessage({ usedBytes, quotaBytes, neededBytes }: QuotaExceededDetails): string {
  const free = Math.max(quotaBytes - usedBytes, 0);
  return (
    `Not enough storage: you use ${formatBytes(usedBytes)} of your ${formatBytes(quotaBytes)} quota ` +
    `(${formatBytes(free)} free) and this needs ${formatBytes(neededBytes)}. ` +
    'Delete images or results you no longer need, or ask an administrator for a larger quota.'
  );
}

function checkBytes(bytes: number): void {
  if (!Number.isSafeInteger(bytes) || bytes < 0)
    throw new RangeError(`bytes must be a non-negative integer, got ${bytes}`);
}

function refuseOverQuota(state: QuotaState, bytes: number): void {
  if (state.bytesUsed + bytes <= state.quotaBytes) return;
  const details: QuotaExceededDetails = {
    usedBytes: state.bytesUsed,
    quotaBytes: state.quotaBytes,
    neededBytes: bytes,
  };
  throw new AppError('payload_too_large', quotaExceededMessage(details), details);
}

/**
 * The same check without a lock or a change, to refuse early (before reading a large upload). Advisory only:
 * chargeQuota in the storing transaction is the check that counts.
 */
export async function precheckQuota(knex: Knex, userId: number, bytes: number): Promise<void> {
  checkBytes(bytes);
  const state = (await knex('users').select('quota_bytes', 'bytes_used').where('id', userId).first()) as
    QuotaState | undefined;
  if (!state) throw notFound('That account does not exist.');
  refuseOverQuota(state, bytes);
}

async function lockUser(trx: Knex.Transaction, userId: number): Promise<QuotaState> {
  const row = (await trx('users')
    .select('quota_bytes', 'bytes_used')
    .where('id', userId)
    .forUpdate()
    .first()) as QuotaState | undefined;
  if (!row) throw notFound('That account does not exist.');
  return row;
}

/**
 * Adds `bytes` to the user's counter after locking the row; throws a 413 AppError ('payload_too_large') with
 * used / quota / needed when it would go above the quota. Returns the state after the charge.
 */
export async function chargeQuota(trx: Knex.Transaction, userId: number, bytes: number): Promise<QuotaState> {
  checkBytes(bytes);
  const state = await lockUser(trx, userId);
  if (state.bytesUsed + bytes > state.quotaBytes) {
    const details: QuotaExceededDetails = {
      usedBytes: state.bytesUsed,
      quotaBytes: state.quotaBytes,
      neededBytes: bytes,
    };
    throw new AppError('payload_too_large', quotaExceededMessage(details), details);
  }
  await trx('users').where('id', userId).increment('bytes_used', bytes);
  return { quotaBytes: state.quotaBytes, bytesUsed: state.bytesUsed + bytes };
}

/** Subtracts `bytes` from the user's counter after locking the row (never below 0). Returns the state after. */
export async function releaseQuota(
  trx: Knex.Transaction,
  userId: number,
  bytes: number,
): Promise<QuotaState> {
  checkBytes(bytes);
  const state = await lockUser(trx, userId);
  const bytesUsed = Math.max(state.bytesUsed - bytes, 0);
  await trx('users').where('id', userId).update({ bytes_used: bytesUsed });
  return { quotaBytes: state.quotaBytes, bytesUsed };
}
