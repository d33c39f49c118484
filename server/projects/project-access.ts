/**
 * Loads the project named by :id with the caller's membership. A project the caller cannot see
 * answers 404 (never 403), so its existence does not leak; a visible one with too small a role answers 403.
 */
import type { RequestHandler } from 'express';

import type { ProjectRole } from '../../shared/projects';
import type { ProjectAccess } from '../types';
import { forbidden, notFound, unauthenticated } from '../http/app-error';
import { Membership } from '../models/membership';
import { Project } from '../models/project';

export const projectNotFoundMessage = 'Project not found.';

const rank: Record<ProjectRole, number> = { viewer: 1, editor: 2, owner: 3 };

const roleMessages: Record<ProjectRole, string> = {
  viewer: 'You need to be a member of this project.',
  editor: 'Only project owners and editors can do this.',
  owner: 'Only project owners can do this.',
};

/** The caller's access, or throws 404 when the project is missing or invisible to them. */
export async function findProjectAccess(user: Express.User, projectId: number): Promise<ProjectAccess> {
  const project = await Project.query().findById(projectId);
  if (!project) throw notFound(projectNotFoundMessage);
  const membership = (await Membership.query().where({ projectId, userId: user.id }).first()) ?? null;
  if (!membership && user.role !== 'admin') throw notFound(projectNotFoundMessage);
  return { project, membership };
}

/** True when the access reaches `minimum`; admins reach every role. */
export function hasRole(user: Express.User, access: ProjectAccess, minimum: ProjectRole): boolean {
  if (user.role === 'admin') return true;
  return access.membership !== null && rank[access.membership.role] >= rank[minimum];
}

/** Route loader: req.projectAccess for :id, at least `minimum` role (admins always pass). */
export function loadProject(minimum: ProjectRole = 'viewer'): RequestHandler {
  return (req, _res, next) => {
    const user = req.user;
    if (!user) return next(unauthenticated());
    findProjectAccess(user, Number(req.params.id))
      .then((access) => {
        if (!hasRole(user, access, minimum)) return next(forbidden(roleMessages[minimum]));
        req.projectAccess = access;
        next();
      })
      .catch(next);
  };
}

export function projectAccessOf(req: Express.Request): ProjectAccess {
  if (!req.projectAccess) throw new Error('loadProject() must run before this handler.');
  return req.projectAccess;
}
