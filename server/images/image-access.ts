/**
 * Loads the image named by :id with the caller's access to its project, by the project's rules: an image of a
 * project the caller cannot see answers 404 (its existence does not leak); visible with too small a role → 403.
 */
import type { RequestHandler } from 'express';

import type { ProjectRole } from '../../shared/projects';
import { AppError, forbidden, notFound, unauthenticated } from '../http/app-error';
import { Image } from '../models/image';
import { findProjectAccess, hasRole } from '../projects/project-access';

declare global {
  // Express's request type is extended by declaration merging into its global namespace.
  // eslint-disable-next-line @typescript-eslint/no-namespace
  namespace Express {
    interface Request {
      /** Set by loadImage(): the image row (without its blobs). */
      image?: Image;
    }
  }
}

export const imageNotFoundMessage = 'Image not found.';

const roleMessages: Record<ProjectRole, string> = {
  viewer: 'You need to be a member of this project.',
  editor: 'Only project owners and editors can do this.',
  owner: 'Only project owners can do this.',
};

/** Route loader: req.image and req.projectAccess for :id, at least `minimum` role in its project. */
export function loadImage(minimum: ProjectRole = 'viewer'): RequestHandler {
  return (req, _res, next) => {
    const user = req.user;
    if (!user) return next(unauthenticated());
    (async () => {
      const image = await Image.query().findById(Number(req.params.id));
      if (!image) throw notFound(imageNotFoundMessage);
      const access = await findProjectAccess(user, image.projectId).catch((error: unknown) => {
        throw error instanceof AppError && error.status === 404 ? notFound(imageNotFoundMessage) : error;
      });
      if (!hasRole(user, access, minimum)) throw forbidden(roleMessages[minimum]);
      req.image = image;
      req.projectAccess = access;
    })().then(() => next(), next);
  };
}

export function imageOf(req: Express.Request): Image {
  if (!req.image) throw new Error('loadImage() must run before this handler.');
  return req.image;
}
