/** Server-side sessions (connect-pg-simple's "session" table) of one user: signing out everywhere. */
import type { Knex } from 'knex';

/** Deletes every stored session of the user, except `keepSessionId` when given. Returns how many went. */
export async function destroyUserSessions(
  knex: Knex | Knex.Transaction,
  userId: number,
  keepSessionId?: string,
): Promise<number> {
  const query = knex('session').whereRaw(`(sess->'passport'->>'user') = ?`, [String(userId)]);
  if (keepSessionId) query.whereNot('sid', keepSessionId);
  return query.delete();
}
