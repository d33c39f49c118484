/** Access guards: signed in, admin. Disabled accounts never reach here (session and token loaders drop them). */
import type { RequestHandler } from 'express';

import { forbidden, unauthenticated } from './app-error';

export const requireSignIn: RequestHandler = (req, _res, next) => {
  next(req.user ? undefined : unauthenticated());
};

export const requireAdmin: RequestHandler = (req, _res, next) => {
  if (!req.user) next(unauthenticated());
  else if (req.user.role !== 'admin') next(forbidden('Only administrators can do this.'));
  else next();
};

/** The signed-in user; only call behind requireSignIn. */
export function currentUser(req: Express.Request): Express.User {
  if (!req.user) throw unauthenticated();
  return req.user;
}
