import type { NextFunction, Request, Response } from 'express';

import type {
  LoginRequest,
  PasswordChangeRequest,
  PasswordResetConfirm,
  PasswordResetRequest,
  SignupRequest,
  UpdateMeRequest,
} from '../../shared/auth';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { AppError } from '../http/app-error';
import { currentUser } from '../http/guards';
import type { User } from '../models/user';
import { recordAudit } from '../audit/audit.service';
import * as auth from './auth.service';
import { type Authentication, clientIp, sessionCookieName } from './authentication';

const logIn = (req: Express.Request, user: User) =>
  new Promise<void>((resolve, reject) =>
    req.login(user, (error?: unknown) => (error ? reject(error) : resolve())),
  );

export function authController(ctx: AppContext, authentication: Authentication) {
  return {
    csrf(req: Request, res: Response) {
      res.json({ token: authentication.issueCsrfToken(req, res) });
    },
    async signUp(req: ApiRequest<SignupRequest>, res: Response) {
      const user = await auth.signUp(ctx, req.body, clientIp(req));
      await logIn(req, user);
      res.status(201).json({ user: user.toDto() });
    },
    login(req: ApiRequest<LoginRequest>, res: Response, next: NextFunction) {
      authentication.passport.authenticate('local', (error: unknown, user: User | false) => {
        if (error) return next(error);
        if (!user) return next(new AppError('wrong_credentials', auth.wrongCredentialsMessage));
        logIn(req, user).then(() => res.json({ user: user.toDto() }), next);
      })(req, res, next);
    },
    async logout(req: Request, res: Response) {
      const user = req.user;
      if (user && req.authMethod === 'session') {
        await recordAudit({
          action: 'auth.sign-out',
          actorId: user.id,
          targetType: 'user',
          targetId: user.id,
          ip: clientIp(req),
        });
      }
      if (req.session) await new Promise<void>((resolve) => req.session.destroy(() => resolve()));
      res.clearCookie(sessionCookieName, { path: '/' });
      res.status(204).end();
    },
    session(req: Request, res: Response) {
      res.json({ user: req.user ? req.user.toDto() : null });
    },
    me(req: Request, res: Response) {
      res.json({ user: currentUser(req).toDto() });
    },
    async updateMe(req: ApiRequest<UpdateMeRequest>, res: Response) {
      const user = await auth.updateMe(currentUser(req), req.body);
      res.json({ user: user.toDto() });
    },
    async changePassword(req: ApiRequest<PasswordChangeRequest>, res: Response) {
      await auth.changePassword(ctx, currentUser(req), req.body, req.session?.id, clientIp(req));
      res.status(204).end();
    },
    async requestReset(req: ApiRequest<PasswordResetRequest>, res: Response) {
      await auth.requestPasswordReset(ctx, req.body.email, clientIp(req));
      res.status(202).end();
    },
    async confirmReset(req: ApiRequest<PasswordResetConfirm>, res: Response) {
      await auth.confirmPasswordReset(ctx, req.body.token, req.body.password, clientIp(req));
      res.status(204).end();
    },
    async previewInvitation(req: ApiRequest<unknown, { token: string }>, res: Response) {
      res.json(await auth.previewInvitation(req.params.token));
    },
  };
}
