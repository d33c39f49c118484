/** Administration: accounts with usage, role / quota / disabled changes (audited), the dev mail inbox. */
import type { AdminUpdateUserRequest, AdminUser, DevMailMessage, DevMailSummary } from '../../shared/admin';
import { recordAudit } from '../audit/audit.service';
import { destroyUserSessions } from '../auth/sessions';
import { badRequest, notFound } from '../http/app-error';
import { isoDateOrNull } from '../models/base-model';
import { DevMail } from '../models/dev-mail';
import { User } from '../models/user';

export const selfDemoteMessage = 'You cannot remove your own administrator role. Ask another administrator.';
export const selfDisableMessage = 'You cannot disable your own account.';
export const userNotFoundMessage = 'No such user.';

type UserWithCount = User & { projectCount: number };

const toAdminUser = (user: UserWithCount): AdminUser => ({
  ...user.toDto(),
  projectCount: Number(user.projectCount ?? 0),
  lastSignInAt: isoDateOrNull(user.lastSignInAt),
});

export async function listUsers(): Promise<AdminUser[]> {
  const users = (await User.query()
    .select('users.*')
    .select(User.relatedQuery('memberships').count().as('projectCount'))
    .orderBy('users.id')) as UserWithCount[];
  return users.map(toAdminUser);
}

async function adminUser(id: number): Promise<AdminUser> {
  const user = (await User.query()
    .select('users.*')
    .select(User.relatedQuery('memberships').count().as('projectCount'))
    .findById(id)) as UserWithCount | undefined;
  if (!user) throw notFound(userNotFoundMessage);
  return toAdminUser(user);
}

export async function updateUser(
  actor: User,
  id: number,
  input: AdminUpdateUserRequest,
  ip: string | null,
): Promise<AdminUser> {
  if (id === actor.id && input.role === 'member') throw badRequest(selfDemoteMessage);
  if (id === actor.id && input.disabled === true) throw badRequest(selfDisableMessage);
  await User.transaction(async (trx) => {
    const user = await User.query(trx).findById(id).forUpdate();
    if (!user) throw notFound(userNotFoundMessage);
    const changes: Partial<Pick<User, 'role' | 'quotaBytes' | 'disabled'>> = {};
    const base = { actorId: actor.id, targetType: 'user' as const, targetId: id, ip };
    if (input.role !== undefined && input.role !== user.role) {
      changes.role = input.role;
      await recordAudit(
        { ...base, action: 'user.role-changed', details: { from: user.role, to: input.role } },
        trx,
      );
    }
    if (input.quotaBytes !== undefined && input.quotaBytes !== user.quotaBytes) {
      changes.quotaBytes = input.quotaBytes;
      await recordAudit(
        { ...base, action: 'user.quota-changed', details: { from: user.quotaBytes, to: input.quotaBytes } },
        trx,
      );
    }
    if (input.disabled !== undefined && input.disabled !== user.disabled) {
      changes.disabled = input.disabled;
      await recordAudit({ ...base, action: input.disabled ? 'user.disabled' : 'user.enabled' }, trx);
      // A disabled account is signed out everywhere at once (tokens are refused on their next use).
      if (input.disabled) await destroyUserSessions(trx, id);
    }
    if (Object.keys(changes).length > 0) await User.query(trx).patch(changes).where('id', id);
  });
  return adminUser(id);
}

export async function listMail(): Promise<DevMailSummary[]> {
  const messages = await DevMail.query()
    .select('id', 'envelopeFrom', 'envelopeTo', 'fromHeader', 'toHeader', 'subject', 'receivedAt')
    .orderBy('id', 'desc')
    .limit(500);
  return messages.map((message) => message.toSummary());
}

export async function getMail(id: number): Promise<DevMailMessage> {
  const message = await DevMail.query().findById(id);
  if (!message) throw notFound('No such message.');
  return message.toMessage();
}
