/** Projects, their members and invitations: bodies of /api/projects/*. */
import { z } from 'zod';

import { emailSchema } from './auth';

/** Owners manage members; editors add images and runs; viewers read and export. */
export const projectRoleSchema = z.enum(['owner', 'editor', 'viewer']);
export type ProjectRole = z.infer<typeof projectRoleSchema>;

/** The roles an invitation or a new member may get (ownership is given later by an owner). */
export const inviteRoleSchema = z.enum(['editor', 'viewer']);
export type InviteRole = z.infer<typeof inviteRoleSchema>;

export const projectNameSchema = z
  .string()
  .trim()
  .min(1, { error: 'Enter a project name.' })
  .max(120, { error: 'Project names are at most 120 characters long.' });
export const projectDescriptionSchema = z
  .string()
  .trim()
  .max(2000, { error: 'Descriptions are at most 2000 characters long.' });

export const projectSummarySchema = z.object({
  id: z.number().int(),
  name: z.string(),
  description: z.string(),
  ownerId: z.number().int().nullable(),
  /** The caller's role in the project; null for an admin who is not a member. */
  myRole: projectRoleSchema.nullable(),
  memberCount: z.number().int().nonnegative(),
  createdAt: z.string(),
  updatedAt: z.string(),
});
export type ProjectSummary = z.infer<typeof projectSummarySchema>;
export const projectListSchema = z.array(projectSummarySchema);

export const memberSchema = z.object({
  userId: z.number().int(),
  email: z.string(),
  displayName: z.string(),
  role: projectRoleSchema,
});
export type Member = z.infer<typeof memberSchema>;
export const memberListSchema = z.array(memberSchema);

export const projectDetailSchema = projectSummarySchema.extend({ members: memberListSchema });
export type ProjectDetail = z.infer<typeof projectDetailSchema>;

export const listProjectsQuerySchema = z.object({
  /** Admins only: list every project, not just their own. */
  all: z.enum(['true', 'false']).optional(),
});

export const createProjectRequestSchema = z.object({
  name: projectNameSchema,
  description: projectDescriptionSchema.optional(),
});
export type CreateProjectRequest = z.infer<typeof createProjectRequestSchema>;

export const updateProjectRequestSchema = z
  .object({ name: projectNameSchema.optional(), description: projectDescriptionSchema.optional() })
  .strict();
export type UpdateProjectRequest = z.infer<typeof updateProjectRequestSchema>;

/** DELETE /api/projects/:id body: the project name typed again. */
export const deleteProjectRequestSchema = z.object({ confirmName: z.string() });
export type DeleteProjectRequest = z.infer<typeof deleteProjectRequestSchema>;

export const projectIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });
export const memberParamsSchema = z.object({
  id: z.coerce.number().int().positive(),
  userId: z.coerce.number().int().positive(),
});
export const invitationParamsSchema = z.object({
  id: z.coerce.number().int().positive(),
  invitationId: z.coerce.number().int().positive(),
});

export const addMemberRequestSchema = z.object({ email: emailSchema, role: inviteRoleSchema });
export type AddMemberRequest = z.infer<typeof addMemberRequestSchema>;

export const updateMemberRequestSchema = z.object({ role: projectRoleSchema });
export type UpdateMemberRequest = z.infer<typeof updateMemberRequestSchema>;

export const invitationSchema = z.object({
  id: z.number().int(),
  projectId: z.number().int(),
  email: z.string(),
  role: inviteRoleSchema,
  invitedById: z.number().int().nullable(),
  createdAt: z.string(),
  expiresAt: z.string(),
});
export type Invitation = z.infer<typeof invitationSchema>;
export const invitationListSchema = z.array(invitationSchema);

/** POST /api/projects/:id/members: 201 `{ member }` for an existing account, 202 `{ invitation }` otherwise. */
export const memberAddedResponseSchema = z.object({ member: memberSchema });
export const invitationCreatedResponseSchema = z.object({ invitation: invitationSchema });
export type MemberAddedResponse = z.infer<typeof memberAddedResponseSchema>;
export type InvitationCreatedResponse = z.infer<typeof invitationCreatedResponseSchema>;
