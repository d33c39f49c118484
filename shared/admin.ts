/** Administration: users with usage, the audit log and the development mail inbox (/api/admin/*). */
import { z } from 'zod';

import { globalRoleSchema, userSchema } from './auth';

export const adminUserSchema = userSchema.extend({
  /** Projects the user is a member of. */
  projectCount: z.number().int().nonnegative(),
  lastSignInAt: z.string().nullable(),
});
export type AdminUser = z.infer<typeof adminUserSchema>;
export const adminUserListSchema = z.array(adminUserSchema);

export const adminUpdateUserRequestSchema = z
  .object({
    role: globalRoleSchema.optional(),
    quotaBytes: z
      .number()
      .int({ error: 'The quota must be a whole number of bytes.' })
      .nonnegative({ error: 'The quota cannot be negative.' })
      .max(Number.MAX_SAFE_INTEGER)
      .optional(),
    disabled: z.boolean().optional(),
  })
  .strict();
export type AdminUpdateUserRequest = z.infer<typeof adminUpdateUserRequestSchema>;

export const userIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });

/** Every kind of event the audit log records. */
export const auditActionSchema = z.enum([
  'auth.sign-up',
  'auth.sign-in',
  'auth.sign-in-failed',
  'auth.sign-out',
  'auth.password-reset-requested',
  'auth.password-reset',
  'auth.password-changed',
  'token.created',
  'token.revoked',
  'project.created',
  'project.updated',
  'project.deleted',
  'member.added',
  'member.role-changed',
  'member.removed',
  'member.left',
  'invitation.created',
  'invitation.revoked',
  'invitation.accepted',
  'user.role-changed',
  'user.quota-changed',
  'user.disabled',
  'user.enabled',
  'user.bootstrapped',
]);
export type AuditAction = z.infer<typeof auditActionSchema>;

export const auditTargetTypeSchema = z.enum(['user', 'project', 'membership', 'invitation', 'token']);
export type AuditTargetType = z.infer<typeof auditTargetTypeSchema>;

export const auditEventSchema = z.object({
  id: z.number().int(),
  action: auditActionSchema,
  actorId: z.number().int().nullable(),
  /** The actor's e-mail at the time of reading (null when the account was deleted or for anonymous events). */
  actorEmail: z.string().nullable(),
  targetType: auditTargetTypeSchema.nullable(),
  targetId: z.number().int().nullable(),
  /** Small event-specific facts (old and new role, the e-mail tried at a failed sign-in …). */
  details: z.record(z.string(), z.unknown()),
  ip: z.string().nullable(),
  createdAt: z.string(),
});
export type AuditEvent = z.infer<typeof auditEventSchema>;

export const auditQuerySchema = z.object({
  action: auditActionSchema.optional(),
  actorId: z.coerce.number().int().positive().optional(),
  targetType: auditTargetTypeSchema.optional(),
  page: z.coerce.number().int().positive().default(1),
  pageSize: z.coerce.number().int().positive().max(200).default(50),
});
export type AuditQuery = z.infer<typeof auditQuerySchema>;

export const auditPageSchema = z.object({
  items: z.array(auditEventSchema),
  total: z.number().int().nonnegative(),
  page: z.number().int().positive(),
  pageSize: z.number().int().positive(),
});
export type AuditPage = z.infer<typeof auditPageSchema>;

export const devMailSummarySchema = z.object({
  id: z.number().int(),
  to: z.string(),
  from: z.string(),
  subject: z.string(),
  receivedAt: z.string(),
});
export type DevMailSummary = z.infer<typeof devMailSummarySchema>;
export const devMailListSchema = z.array(devMailSummarySchema);

export const devMailMessageSchema = devMailSummarySchema.extend({
  text: z.string(),
  html: z.string().nullable(),
});
export type DevMailMessage = z.infer<typeof devMailMessageSchema>;

export const mailIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });
