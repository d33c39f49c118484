/** Accounts and sign-in: request and response bodies of /api/auth/*. */
import { z } from 'zod';

export const globalRoleSchema = z.enum(['admin', 'member']);
export type GlobalRole = z.infer<typeof globalRoleSchema>;

/** An e-mail address as typed (trimmed). Uniqueness is case-insensitive on the server. */
export const emailSchema = z
  .string()
  .trim()
  .max(254)
  .pipe(z.email({ error: 'Enter a valid e-mail address.' }));

/** A new password. The server additionally enforces its configured minimum length (see /api/config/public). */
export const newPasswordSchema = z
  .string()
  .min(1, { error: 'Enter a password.' })
  .max(200, { error: 'Passwords are at most 200 characters long.' });

export const displayNameSchema = z
  .string()
  .trim()
  .min(1, { error: 'Enter a display name.' })
  .max(100, { error: 'Display names are at most 100 characters long.' });

export const userSchema = z.object({
  id: z.number().int(),
  email: z.string(),
  displayName: z.string(),
  role: globalRoleSchema,
  /** Storage quota in bytes. */
  quotaBytes: z.number().int().nonnegative(),
  /** Storage in use, in bytes (images and run products). */
  bytesUsed: z.number().int().nonnegative(),
  disabled: z.boolean(),
  /** Send an e-mail when one of the user's separation runs finishes. */
  emailOnRunFinish: z.boolean(),
  createdAt: z.string(),
});
export type User = z.infer<typeof userSchema>;

export const userResponseSchema = z.object({ user: userSchema });
export type UserResponse = z.infer<typeof userResponseSchema>;

/** GET /api/auth/session: who is signed in, or null; answers 200 either way (a probe for the client's start). */
export const sessionResponseSchema = z.object({ user: userSchema.nullable() });
export type SessionResponse = z.infer<typeof sessionResponseSchema>;

export const csrfTokenResponseSchema = z.object({ token: z.string() });
export type CsrfTokenResponse = z.infer<typeof csrfTokenResponseSchema>;

export const signupRequestSchema = z.object({
  email: emailSchema,
  displayName: displayNameSchema,
  password: newPasswordSchema,
  /** Token from an invitation e-mail; lets the invited address register while open registration is off. */
  invitation: z.string().min(1).max(200).optional(),
});
export type SignupRequest = z.infer<typeof signupRequestSchema>;

export const loginRequestSchema = z.object({
  email: z.string().trim().min(1, { error: 'Enter your e-mail address.' }).max(254),
  password: z.string().min(1, { error: 'Enter your password.' }).max(200),
});
export type LoginRequest = z.infer<typeof loginRequestSchema>;

/** PATCH /api/auth/me: the signed-in user's own settings. */
export const updateMeRequestSchema = z
  .object({
    displayName: displayNameSchema.optional(),
    emailOnRunFinish: z.boolean().optional(),
  })
  .strict();
export type UpdateMeRequest = z.infer<typeof updateMeRequestSchema>;

export const passwordResetRequestSchema = z.object({ email: emailSchema });
export type PasswordResetRequest = z.infer<typeof passwordResetRequestSchema>;

export const passwordResetConfirmSchema = z.object({
  token: z.string().min(1).max(200),
  password: newPasswordSchema,
});
export type PasswordResetConfirm = z.infer<typeof passwordResetConfirmSchema>;

export const passwordChangeRequestSchema = z.object({
  currentPassword: z.string().min(1, { error: 'Enter your current password.' }).max(200),
  newPassword: newPasswordSchema,
});
export type PasswordChangeRequest = z.infer<typeof passwordChangeRequestSchema>;

/** GET /api/auth/invitations/:token: what the sign-up page shows for an invitation link. */
export const invitationPreviewSchema = z.object({
  email: z.string(),
  projectName: z.string(),
  invitedBy: z.string(),
  role: z.enum(['editor', 'viewer']),
  expiresAt: z.string(),
});
export type InvitationPreview = z.infer<typeof invitationPreviewSchema>;
