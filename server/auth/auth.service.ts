/** Accounts: sign-up (with invitations), credentials, own settings, password change and reset. */
import type { Knex } from 'knex';

import type {
  PasswordChangeRequest,
  SignupRequest,
  UpdateMeRequest,
  InvitationPreview,
} from '../../shared/auth';
import { recordAudit } from '../audit/audit.service';
import type { AppContext } from '../context';
import { AppError, badRequest, conflict, forbidden, notFound } from '../http/app-error';
import { passwordResetMail } from '../mail/templates';
import { isoDate } from '../models/base-model';
import { Invitation } from '../models/invitation';
import { Membership } from '../models/membership';
import { PasswordReset } from '../models/password-reset';
import { User } from '../models/user';
import { checkPassword, hashPassword, randomToken, sha256Hex, spendPasswordCheck } from './secrets';
import { destroyUserSessions } from './sessions';

export const wrongCredentialsMessage = 'Wrong e-mail or password.';
export const disabledMessage = 'This account is disabled. Ask an administrator to enable it again.';
export const registrationClosedMessage =
  'Registration is closed. Ask an administrator or a project owner to invite you, then use the link in the e-mail.';
export const emailTakenMessage = 'An account with this e-mail address already exists.';
export const resetLinkInvalidMessage = 'This reset link is not valid or was already used. Ask for a new one.';
export const resetLinkExpiredMessage = 'This reset link has expired. Ask for a new one.';
export const wrongCurrentPasswordMessage = 'Your current password is not correct.';

/** 400 with a field issue when the password is shorter than the configured minimum. */
export function checkPasswordLength(ctx: AppContext, password: string, field: string): void {
  const min = ctx.config.passwordMinLength;
  if (password.length < min) {
    const message = `Passwords must be at least ${min} characters long.`;
    throw new AppError('validation_failed', `${field}: ${message}`, { issues: [{ path: [field], message }] });
  }
}

const pendingInvitations = (email: string, trx?: Knex.Transaction) =>
  Invitation.query(trx)
    .whereRaw('lower(email) = lower(?)', [email])
    .whereNull('acceptedAt')
    .where('expiresAt', '>', new Date());

/** Creates the account, joins the projects it was invited to; everything in one transaction. */
export async function signUp(ctx: AppContext, input: SignupRequest, ip: string | null): Promise<User> {
  checkPasswordLength(ctx, input.password, 'password');
  if (!ctx.config.registrationOpen) {
    const invitation = input.invitation
      ? await pendingInvitations(input.email).where('tokenHash', sha256Hex(input.invitation)).first()
      : undefined;
    if (!invitation) throw forbidden(registrationClosedMessage);
  }
  const passwordHash = await hashPassword(input.password, ctx.config.bcryptRounds);
  return User.transaction(async (trx) => {
    if (await User.query(trx).modify('byEmail', input.email).first()) throw conflict(emailTakenMessage);
    const user = await User.query(trx).insertAndFetch({
      email: input.email,
      displayName: input.displayName,
      passwordHash,
      role: 'member',
      quotaBytes: ctx.config.defaultQuotaBytes,
      bytesUsed: 0,
    });
    await recordAudit(
      { action: 'auth.sign-up', actorId: user.id, targetType: 'user', targetId: user.id, ip },
      trx,
    );
    for (const invitation of await pendingInvitations(input.email, trx).forUpdate()) {
      await Membership.query(trx)
        .insert({ projectId: invitation.projectId, userId: user.id, role: invitation.role })
        .onConflict(['projectId', 'userId'])
        .ignore();
      await Invitation.query(trx).patch({ acceptedAt: new Date() }).where('id', invitation.id);
      await recordAudit(
        {
          action: 'invitation.accepted',
          actorId: user.id,
          targetType: 'invitation',
          targetId: invitation.id,
          details: { projectId: invitation.projectId, role: invitation.role },
          ip,
        },
        trx,
      );
    }
    return user;
  });
}

/**
 * Checks e-mail and password. Wrong ones → null (and an audit entry); a disabled account → 403.
 * Unknown addresses still spend one bcrypt comparison so timing does not tell them apart.
 */
export async function verifyCredentials(
  ctx: AppContext,
  email: string,
  password: string,
  ip: string | null,
): Promise<User | null> {
  const user = await User.query().modify('byEmail', email).first();
  const valid = user ? await checkPassword(password, user.passwordHash) : false;
  if (!user) await spendPasswordCheck(password, ctx.config.bcryptRounds);
  if (!user || !valid) {
    await recordAudit({
      action: 'auth.sign-in-failed',
      targetType: user ? 'user' : null,
      targetId: user?.id ?? null,
      details: { email: email.slice(0, 254), reason: user ? 'wrong password' : 'unknown e-mail' },
      ip,
    });
    return null;
  }
  if (user.disabled) {
    await recordAudit({
      action: 'auth.sign-in-failed',
      targetType: 'user',
      targetId: user.id,
      details: { email: user.email, reason: 'account disabled' },
      ip,
    });
    throw forbidden(disabledMessage);
  }
  await User.query().patch({ lastSignInAt: new Date() }).where('id', user.id);
  await recordAudit({ action: 'auth.sign-in', actorId: user.id, targetType: 'user', targetId: user.id, ip });
  return user;
}

export async function updateMe(user: User, input: UpdateMeRequest): Promise<User> {
  if (Object.keys(input).length === 0) return user;
  return user.$query().patchAndFetch(input);
}

/** Changes the password after checking the current one; other sessions of the user are signed out. */
export async function changePassword(
  ctx: AppContext,
  user: User,
  input: PasswordChangeRequest,
  currentSessionId: string | undefined,
  ip: string | null,
): Promise<void> {
  checkPasswordLength(ctx, input.newPassword, 'newPassword');
  const fresh = await User.query().findById(user.id).throwIfNotFound();
  if (!(await checkPassword(input.currentPassword, fresh.passwordHash)))
    throw badRequest(wrongCurrentPasswordMessage);
  const passwordHash = await hashPassword(input.newPassword, ctx.config.bcryptRounds);
  await User.transaction(async (trx) => {
    await User.query(trx).patch({ passwordHash }).where('id', user.id);
    await destroyUserSessions(trx, user.id, currentSessionId);
    await recordAudit(
      { action: 'auth.password-changed', actorId: user.id, targetType: 'user', targetId: user.id, ip },
      trx,
    );
  });
}

/** Always succeeds from the caller's view; mails a single-use link when an active account has this address. */
export async function requestPasswordReset(ctx: AppContext, email: string, ip: string | null): Promise<void> {
  const user = await User.query().modify('byEmail', email).first();
  if (!user || user.disabled) return;
  const token = randomToken();
  const expiresAt = new Date(Date.now() + ctx.config.resetTokenTtlMinutes * 60_000);
  await PasswordReset.transaction(async (trx) => {
    await PasswordReset.query(trx).insert({
      userId: user.id,
      tokenHash: sha256Hex(token),
      expiresAt,
      requestedIp: ip,
    });
    await recordAudit(
      { action: 'auth.password-reset-requested', targetType: 'user', targetId: user.id, ip },
      trx,
    );
  });
  ctx.mailer.send(
    passwordResetMail(user.email, `${ctx.config.publicUrl}/reset/${token}`, ctx.config.resetTokenTtlMinutes),
  );
}

/** Sets the new password if the token is known, unused and unexpired; signs the user out everywhere. */
export async function confirmPasswordReset(
  ctx: AppContext,
  token: string,
  password: string,
  ip: string | null,
): Promise<void> {
  checkPasswordLength(ctx, password, 'password');
  const passwordHash = await hashPassword(password, ctx.config.bcryptRounds);
  await PasswordReset.transaction(async (trx) => {
    const reset = await PasswordReset.query(trx).where('tokenHash', sha256Hex(token)).forUpdate().first();
    if (!reset || reset.usedAt) throw badRequest(resetLinkInvalidMessage);
    if (reset.expiresAt.getTime() <= Date.now()) throw badRequest(resetLinkExpiredMessage);
    const user = await User.query(trx).findById(reset.userId);
    if (!user || user.disabled) throw badRequest(resetLinkInvalidMessage);
    await User.query(trx).patch({ passwordHash }).where('id', user.id);
    // This link and every other open link of the user stop working.
    await PasswordReset.query(trx).patch({ usedAt: new Date() }).where('userId', user.id).whereNull('usedAt');
    await destroyUserSessions(trx, user.id);
    await recordAudit(
      { action: 'auth.password-reset', actorId: user.id, targetType: 'user', targetId: user.id, ip },
      trx,
    );
  });
}

export async function previewInvitation(token: string): Promise<InvitationPreview> {
  const invitation = await Invitation.query()
    .where('tokenHash', sha256Hex(token))
    .whereNull('acceptedAt')
    .where('expiresAt', '>', new Date())
    .withGraphFetched('[project, invitedBy]')
    .first();
  if (!invitation || !invitation.project) throw notFound('This invitation is not valid any more.');
  return {
    email: invitation.email,
    projectName: invitation.project.name,
    invitedBy: invitation.invitedBy?.displayName ?? 'A Skysieve user',
    role: invitation.role,
    expiresAt: isoDate(invitation.expiresAt),
  };
}
