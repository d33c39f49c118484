/** Projects, members and invitations. Multi-row changes run in one transaction with their audit entry. */
import type { Knex } from 'knex';

import type {
  CreateProjectRequest,
  Invitation as InvitationDto,
  InviteRole,
  Member,
  ProjectDetail,
  ProjectRole,
  ProjectSummary,
  UpdateProjectRequest,
} from '../../shared/projects';
import { recordAudit } from '../audit/audit.service';
import { randomToken, sha256Hex } from '../auth/secrets';
import type { AppContext } from '../context';
import { badRequest, conflict, notFound } from '../http/app-error';
import { addedToProjectMail, invitationMail } from '../mail/templates';
import { isoDate } from '../models/base-model';
import { Invitation } from '../models/invitation';
import { Membership } from '../models/membership';
import { Project } from '../models/project';
import { User } from '../models/user';
import type { ProjectAccess } from '../types';

export const lastOwnerMessage = 'A project needs at least one owner. Make someone else an owner first.';
export const confirmNameMessage = 'Type the project name exactly to confirm the deletion.';
export const alreadyMemberMessage = 'That person is already a member of this project.';
export const alreadyInvitedMessage = 'An invitation to that address is already pending for this project.';
export const memberNotFoundMessage = 'That person is not a member of this project.';
export const notAMemberMessage = 'You are not a member of this project.';

interface SummaryRow {
  id: number;
  name: string;
  description: string;
  ownerId: number | null;
  myRole: ProjectRole | null;
  memberCount: number;
  createdAt: Date;
  updatedAt: Date;
}

function summaryQuery(knex: Knex, userId: number) {
  return knex('projects as p')
    .leftJoin('memberships as m', (join) =>
      join.on('m.project_id', 'p.id').andOn('m.user_id', knex.raw('?', [userId])),
    )
    .select(
      'p.id',
      'p.name',
      'p.description',
      'p.owner_id',
      'p.created_at',
      'p.updated_at',
      'm.role as my_role',
      knex.raw('(select count(*) from memberships c where c.project_id = p.id)::int as member_count'),
    );
}

const toSummary = (row: SummaryRow): ProjectSummary => ({
  id: row.id,
  name: row.name,
  description: row.description,
  ownerId: row.ownerId,
  myRole: row.myRole ?? null,
  memberCount: row.memberCount,
  createdAt: isoDate(row.createdAt),
  updatedAt: isoDate(row.updatedAt),
});

/** My projects (admins with `all`: every project), most recently changed first. */
export async function listProjects(user: User, all: boolean): Promise<ProjectSummary[]> {
  const query = summaryQuery(Project.knex(), user.id).orderBy('p.updated_at', 'desc').orderBy('p.id', 'desc');
  if (!(all && user.role === 'admin')) query.whereNotNull('m.id');
  return ((await query) as SummaryRow[]).map(toSummary);
}

export async function projectSummary(user: User, projectId: number): Promise<ProjectSummary> {
  const row = (await summaryQuery(Project.knex(), user.id).where('p.id', projectId).first()) as
    SummaryRow | undefined;
  if (!row) throw notFound('Project not found.');
  return toSummary(row);
}

export async function listMembers(projectId: number): Promise<Member[]> {
  const memberships = await Membership.query()
    .where('projectId', projectId)
    .withGraphJoined('user')
    .orderByRaw(`case memberships.role when 'owner' then 0 when 'editor' then 1 else 2 end`)
    .orderBy('user.displayName');
  return memberships.map(toMember);
}

const toMember = (membership: Membership): Member => ({
  userId: membership.userId,
  email: membership.user?.email ?? '',
  displayName: membership.user?.displayName ?? '',
  role: membership.role,
});

export async function projectDetail(user: User, projectId: number): Promise<ProjectDetail> {
  return { ...(await projectSummary(user, projectId)), members: await listMembers(projectId) };
}

export async function createProject(
  user: User,
  input: CreateProjectRequest,
  ip: string | null,
): Promise<ProjectSummary> {
  const project = await Project.transaction(async (trx) => {
    const created = await Project.query(trx).insertAndFetch({
      name: input.name,
      description: input.description ?? '',
      ownerId: user.id,
    });
    await Membership.query(trx).insert({ projectId: created.id, userId: user.id, role: 'owner' });
    await recordAudit(
      {
        action: 'project.created',
        actorId: user.id,
        targetType: 'project',
        targetId: created.id,
        details: { name: created.name },
        ip,
      },
      trx,
    );
    return created;
  });
  return projectSummary(user, project.id);
}

export async function updateProject(
  user: User,
  access: ProjectAccess,
  input: UpdateProjectRequest,
  ip: string | null,
): Promise<ProjectSummary> {
  if (Object.keys(input).length > 0) {
    await Project.transaction(async (trx) => {
      await Project.query(trx).patch(input).where('id', access.project.id);
      await recordAudit(
        {
          action: 'project.updated',
          actorId: user.id,
          targetType: 'project',
          targetId: access.project.id,
          details: {
            before: { name: access.project.name, description: access.project.description },
            after: input,
          },
          ip,
        },
        trx,
      );
    });
  }
  return projectSummary(user, access.project.id);
}

export async function deleteProject(
  user: User,
  access: ProjectAccess,
  confirmName: string,
  ip: string | null,
): Promise<void> {
  if (confirmName !== access.project.name) throw badRequest(confirmNameMessage);
  await Project.transaction(async (trx) => {
    await Project.query(trx).deleteById(access.project.id);
    await recordAudit(
      {
        action: 'project.deleted',
        actorId: user.id,
        targetType: 'project',
        targetId: access.project.id,
        details: { name: access.project.name },
        ip,
      },
      trx,
    );
  });
}

export type AddMemberResult =
  { kind: 'member'; member: Member } | { kind: 'invitation'; invitation: InvitationDto };

/** Adds an existing account at once; otherwise invites the address (joins on sign-up). Both send an e-mail. */
export async function addMember(
  ctx: AppContext,
  actor: User,
  access: ProjectAccess,
  email: string,
  role: InviteRole,
  ip: string | null,
): Promise<AddMemberResult> {
  const project = access.project;
  const projectUrl = `${ctx.config.publicUrl}/projects/${project.id}`;
  const existing = await User.query().modify('byEmail', email).first();
  if (existing) {
    const member = await Membership.transaction(async (trx) => {
      if (await Membership.query(trx).where({ projectId: project.id, userId: existing.id }).first()) {
        throw conflict(alreadyMemberMessage);
      }
      const membership = await Membership.query(trx).insertAndFetch({
        projectId: project.id,
        userId: existing.id,
        role,
      });
      await recordAudit(
        {
          action: 'member.added',
          actorId: actor.id,
          targetType: 'membership',
          targetId: membership.id,
          details: { projectId: project.id, userId: existing.id, role },
          ip,
        },
        trx,
      );
      return membership;
    });
    ctx.mailer.send(addedToProjectMail(existing.email, project.name, actor.displayName, role, projectUrl));
    return {
      kind: 'member',
      member: {
        userId: existing.id,
        email: existing.email,
        displayName: existing.displayName,
        role: member.role,
      },
    };
  }
  const token = randomToken();
  const invitation = await Invitation.transaction(async (trx) => {
    const pending = await Invitation.query(trx)
      .where('projectId', project.id)
      .whereRaw('lower(email) = lower(?)', [email])
      .whereNull('acceptedAt')
      .first();
    if (pending && pending.expiresAt.getTime() > Date.now()) throw conflict(alreadyInvitedMessage);
    // An expired invitation to the same address is replaced by the new one.
    if (pending) await Invitation.query(trx).deleteById(pending.id);
    const created = await Invitation.query(trx).insertAndFetch({
      projectId: project.id,
      email,
      role,
      tokenHash: sha256Hex(token),
      invitedById: actor.id,
      expiresAt: new Date(Date.now() + ctx.config.invitationTtlDays * 24 * 3600 * 1000),
      acceptedAt: null,
    });
    await recordAudit(
      {
        action: 'invitation.created',
        actorId: actor.id,
        targetType: 'invitation',
        targetId: created.id,
        details: { projectId: project.id, email, role },
        ip,
      },
      trx,
    );
    return created;
  });
  const signupUrl = `${ctx.config.publicUrl}/signup?invitation=${encodeURIComponent(token)}`;
  ctx.mailer.send(
    invitationMail(email, project.name, actor.displayName, role, signupUrl, ctx.config.invitationTtlDays),
  );
  return { kind: 'invitation', invitation: invitation.toDto() };
}

export async function listInvitations(projectId: number): Promise<InvitationDto[]> {
  const invitations = await Invitation.query()
    .where('projectId', projectId)
    .whereNull('acceptedAt')
    .orderBy('id', 'desc');
  return invitations.map((invitation) => invitation.toDto());
}

export async function revokeInvitation(
  actor: User,
  projectId: number,
  invitationId: number,
  ip: string | null,
): Promise<void> {
  await Invitation.transaction(async (trx) => {
    const removed = await Invitation.query(trx)
      .delete()
      .where({ id: invitationId, projectId })
      .whereNull('acceptedAt');
    if (removed === 0) throw notFound('No such invitation in this project.');
    await recordAudit(
      {
        action: 'invitation.revoked',
        actorId: actor.id,
        targetType: 'invitation',
        targetId: invitationId,
        details: { projectId },
        ip,
      },
      trx,
    );
  });
}

/** Locks the project's memberships and returns the one of `userId` (404 when not a member). */
async function lockedMembership(trx: Knex.Transaction, projectId: number, userId: number, message: string) {
  const memberships = await Membership.query(trx).where('projectId', projectId).forUpdate();
  const membership = memberships.find((entry) => entry.userId === userId);
  if (!membership) throw notFound(message);
  const owners = memberships.filter((entry) => entry.role === 'owner');
  return { membership, owners };
}

/** Keeps projects.owner_id on a current owner after `userId` stops being one. */
async function handOverOwnerId(trx: Knex.Transaction, projectId: number, userId: number): Promise<void> {
  const project = await Project.query(trx).findById(projectId);
  if (!project || project.ownerId !== userId) return;
  const next = await Membership.query(trx)
    .where({ projectId, role: 'owner' })
    .orderBy('createdAt')
    .orderBy('id')
    .first();
  await Project.query(trx)
    .patch({ ownerId: next?.userId ?? null })
    .where('id', projectId);
}

export async function changeMemberRole(
  actor: User,
  projectId: number,
  userId: number,
  role: ProjectRole,
  ip: string | null,
): Promise<Member> {
  return Membership.transaction(async (trx) => {
    const { membership, owners } = await lockedMembership(trx, projectId, userId, memberNotFoundMessage);
    if (membership.role === 'owner' && role !== 'owner' && owners.length === 1)
      throw conflict(lastOwnerMessage);
    if (membership.role !== role) {
      await Membership.query(trx).patch({ role }).where('id', membership.id);
      if (role !== 'owner') await handOverOwnerId(trx, projectId, userId);
      await recordAudit(
        {
          action: 'member.role-changed',
          actorId: actor.id,
          targetType: 'membership',
          targetId: membership.id,
          details: { projectId, userId, from: membership.role, to: role },
          ip,
        },
        trx,
      );
    }
    const user = await User.query(trx).findById(userId).throwIfNotFound();
    return { userId, email: user.email, displayName: user.displayName, role };
  });
}

export async function removeMember(
  actor: User,
  projectId: number,
  userId: number,
  ip: string | null,
  action: 'member.removed' | 'member.left' = 'member.removed',
): Promise<void> {
  await Membership.transaction(async (trx) => {
    const message = action === 'member.left' ? notAMemberMessage : memberNotFoundMessage;
    const { membership, owners } = await lockedMembership(trx, projectId, userId, message);
    if (membership.role === 'owner' && owners.length === 1) throw conflict(lastOwnerMessage);
    await Membership.query(trx).deleteById(membership.id);
    await handOverOwnerId(trx, projectId, userId);
    await recordAudit(
      {
        action,
        actorId: actor.id,
        targetType: 'membership',
        targetId: membership.id,
        details: { projectId, userId, role: membership.role },
        ip,
      },
      trx,
    );
  });
}
