/**
 * Route loader for /api/comparisons/:id/…: the comparison with the caller's role on its project. A comparison the
 * caller cannot see answers 404 (never 403, so a shared link leaks nothing to non-members); visible with too
 * small a role answers 403. The loaded comparison sits in res.locals.
 */
import type { RequestHandler, Response } from 'express';

import type { ProjectRole } from '../../shared/projects';
import { forbidden, notFound, unauthenticated } from '../http/app-error';
import { Comparison } from '../models/comparison';
import { findProjectAccess, hasRole } from '../projects/project-access';
import type { ProjectAccess } from '../types';

export const comparisonNotFoundMessage = 'Comparison not found.';

const roleMessages: Record<ProjectRole, string> = {
  viewer: 'You need to be a member of this project.',
  editor: 'Only project owners and editors can change comparisons.',
  owner: 'Only project owners can do this.',
};

export function loadComparison(minimum: ProjectRole): RequestHandler {
  return (req, res, next) => {
    const user = req.user;
    if (!user) return next(unauthenticated());
    (async () => {
      const comparison = await Comparison.query().findById(Number(req.params.id));
      if (!comparison) throw notFound(comparisonNotFoundMessage);
      const access = await findProjectAccess(user, comparison.projectId).catch(() => {
        throw notFound(comparisonNotFoundMessage);
      });
      if (!hasRole(user, access, minimum)) throw forbidden(roleMessages[minimum]);
      res.locals.comparison = comparison;
      res.locals.comparisonAccess = access;
    })().then(() => next(), next);
  };
}

export function comparisonOf(res: Response): Comparison {
  const comparison = res.locals.comparison as Comparison | undefined;
  if (!comparison) throw new Error('loadComparison() must run before this handler.');
  return comparison;
}

export function comparisonAccessOf(res: Response): ProjectAccess {
  const access = res.locals.comparisonAccess as ProjectAccess | undefined;
  if (!access) throw new Error('loadComparison() must run before this handler.');
  return access;
}
