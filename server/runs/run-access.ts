/**
 * Route loaders for runs: the image named by :id (POST/GET /api/images/:id/runs) or the run named by :id
 * (/api/runs/:id/…), with the caller's role on its project. Invisible → 404 (never 403, so existence does not
 * leak); visible with too small a role → 403. The loaded objects sit in res.locals.
 */
import type { RequestHandler, Response } from 'express';

import type { ProjectRole } from '../../shared/projects';
import { forbidden, notFound, unauthenticated } from '../http/app-error';
import { Image } from '../models/image';
import { Run } from '../models/run';
import { findProjectAccess, hasRole } from '../projects/project-access';

export const imageNotFoundMessage = 'Image not found.';
export const runNotFoundMessage = 'Run not found.';

const roleMessages: Record<ProjectRole, string> = {
  viewer: 'You need to be a member of this project.',
  editor: 'Only project owners and editors can start, cancel or delete runs.',
  owner: 'Only project owners can do this.',
};

async function checkProject(user: Express.User, projectId: number, minimum: ProjectRole, missing: string) {
  const access = await findProjectAccess(user, projectId).catch(() => {
    throw notFound(missing);
  });
  if (!hasRole(user, access, minimum)) throw forbidden(roleMessages[minimum]);
  return access;
}

export function loadImageForRuns(minimum: ProjectRole): RequestHandler {
  return (req, res, next) => {
    const user = req.user;
    if (!user) return next(unauthenticated());
    (async () => {
      const image = await Image.query().modify('summaryColumns').findById(Number(req.params.id));
      if (!image) throw notFound(imageNotFoundMessage);
      await checkProject(user, image.projectId, minimum, imageNotFoundMessage);
      res.locals.image = image;
    })().then(() => next(), next);
  };
}

export function loadRun(minimum: ProjectRole): RequestHandler {
  return (req, res, next) => {
    const user = req.user;
    if (!user) return next(unauthenticated());
    (async () => {
      // Everything but the diagnostics (the largest column), which only GET /api/runs/:id reads.
      const run = await Run.query().modify('withoutDiagnostics').findById(Number(req.params.id));
      if (!run) throw notFound(runNotFoundMessage);
      await checkProject(user, run.projectId, minimum, runNotFoundMessage);
      res.locals.run = run;
    })().then(() => next(), next);
  };
}

export function imageOf(res: Response): Image {
  const image = res.locals.image as Image | undefined;
  if (!image) throw new Error('loadImageForRuns() must run before this handler.');
  return image;
}

export function runOf(res: Response): Run {
  const run = res.locals.run as Run | undefined;
  if (!run) throw new Error('loadRun() must run before this handler.');
  return run;
}
