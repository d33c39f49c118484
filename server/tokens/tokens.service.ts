/** Personal API tokens: `sks_` + 32 random bytes (base64url); only the SHA-256 is stored. */
import type { CreatedToken } from '../../shared/tokens';
import { recordAudit } from '../audit/audit.service';
import { randomToken, sha256Hex } from '../auth/secrets';
import { notFound } from '../http/app-error';
import { ApiToken } from '../models/api-token';
import type { User } from '../models/user';

const tokenPrefix = 'sks_';
/** How much of the token is kept readable in lists. */
const shownLength = 12;

export async function createToken(user: User, name: string, ip: string | null): Promise<CreatedToken> {
  const token = `${tokenPrefix}${randomToken(32)}`;
  const row = await ApiToken.transaction(async (trx) => {
    const created = await ApiToken.query(trx).insertAndFetch({
      userId: user.id,
      name,
      prefix: token.slice(0, shownLength),
      tokenHash: sha256Hex(token),
      lastUsedAt: null,
    });
    await recordAudit(
      {
        action: 'token.created',
        actorId: user.id,
        targetType: 'token',
        targetId: created.id,
        details: { name },
        ip,
      },
      trx,
    );
    return created;
  });
  return { ...row.toDto(), token };
}

export async function listTokens(user: User): Promise<ApiToken[]> {
  return ApiToken.query().where('userId', user.id).orderBy('id', 'desc');
}

export async function revokeToken(user: User, tokenId: number, ip: string | null): Promise<void> {
  await ApiToken.transaction(async (trx) => {
    const removed = await ApiToken.query(trx).delete().where({ id: tokenId, userId: user.id });
    if (removed === 0) throw notFound('No such token.');
    await recordAudit(
      { action: 'token.revoked', actorId: user.id, targetType: 'token', targetId: tokenId, ip },
      trx,
    );
  });
}

/** `lastUsedAt` is written at most this often per token, so it is accurate to about this much. */
export const LAST_USED_RESOLUTION_MS = 60_000;

/**
 * The active account a token belongs to, or null (unknown token, disabled account). Records the use, at most
 * once per `LAST_USED_RESOLUTION_MS`: writing on every request made concurrent clients of one token queue on
 * its row lock. The condition is repeated in the UPDATE so that of many requests racing past the first check
 * only one writes (PostgreSQL re-checks the WHERE after waiting for the lock).
 */
export async function findUserByToken(token: string): Promise<User | null> {
  if (!token.startsWith(tokenPrefix) || token.length > 200) return null;
  const row = await ApiToken.query().where('tokenHash', sha256Hex(token)).withGraphFetched('user').first();
  if (!row?.user || row.user.disabled) return null;
  const now = new Date();
  const staleBefore = new Date(now.getTime() - LAST_USED_RESOLUTION_MS);
  if (row.lastUsedAt === null || row.lastUsedAt < staleBefore) {
    await ApiToken.query()
      .patch({ lastUsedAt: now })
      .where('id', row.id)
      .where((stale) => stale.whereNull('lastUsedAt').orWhere('lastUsedAt', '<', staleBefore));
  }
  return row.user;
}
