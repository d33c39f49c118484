import { z } from 'zod';

import {
  csrfTokenResponseSchema,
  invitationPreviewSchema,
  loginRequestSchema,
  passwordChangeRequestSchema,
  passwordResetConfirmSchema,
  passwordResetRequestSchema,
  sessionResponseSchema,
  signupRequestSchema,
  updateMeRequestSchema,
  userResponseSchema,
} from '../../shared/auth';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { authController } from './auth.controller';
import type { Authentication } from './authentication';
import { createAuthRateLimits } from './rate-limits';

export function authRoutes(ctx: AppContext, authentication: Authentication): AnyRouteSpec[] {
  const controller = authController(ctx, authentication);
  const limits = createAuthRateLimits(ctx.config);
  const tag = 'Accounts';
  return [
    defineRoute({
      method: 'get',
      path: '/api/auth/csrf',
      summary: 'CSRF token for this session (send it as x-csrf-token)',
      tag,
      access: 'public',
      responses: { 200: { description: 'Token', schema: csrfTokenResponseSchema } },
      handler: controller.csrf,
    }),
    defineRoute({
      method: 'post',
      path: '/api/auth/signup',
      summary: 'Create an account and sign in',
      tag,
      access: 'public',
      before: [limits.signUp],
      body: signupRequestSchema,
      responses: { 201: { description: 'Signed up', schema: userResponseSchema }, ...errors(403, 409, 429) },
      handler: controller.signUp,
    }),
    defineRoute({
      method: 'post',
      path: '/api/auth/login',
      summary: 'Sign in with e-mail and password',
      tag,
      access: 'public',
      before: [limits.signIn],
      body: loginRequestSchema,
      responses: { 200: { description: 'Signed in', schema: userResponseSchema }, ...errors(401, 403, 429) },
      handler: controller.login,
    }),
    defineRoute({
      method: 'post',
      path: '/api/auth/logout',
      summary: 'Sign out (ends the session)',
      tag,
      access: 'public',
      responses: { 204: { description: 'Signed out' } },
      handler: controller.logout,
    }),
    defineRoute({
      method: 'get',
      path: '/api/auth/session',
      summary: 'Who is signed in: the account, or null when nobody is (200 either way, unlike /api/auth/me)',
      tag,
      access: 'public',
      responses: { 200: { description: 'Account or null', schema: sessionResponseSchema } },
      handler: controller.session,
    }),
    defineRoute({
      method: 'get',
      path: '/api/auth/me',
      summary: 'The signed-in account',
      tag,
      access: 'signed-in',
      responses: { 200: { description: 'Account', schema: userResponseSchema } },
      handler: controller.me,
    }),
    defineRoute({
      method: 'patch',
      path: '/api/auth/me',
      summary: 'Change own display name or notification setting',
      tag,
      access: 'signed-in',
      body: updateMeRequestSchema,
      responses: { 200: { description: 'Account', schema: userResponseSchema } },
      handler: controller.updateMe,
    }),
    defineRoute({
      method: 'post',
      path: '/api/auth/password',
      summary: 'Change own password (other sessions are signed out)',
      tag,
      access: 'signed-in',
      body: passwordChangeRequestSchema,
      responses: { 204: { description: 'Changed' } },
      handler: controller.changePassword,
    }),
    defineRoute({
      method: 'post',
      path: '/api/auth/password-reset/request',
      summary: 'E-mail a password reset link (always 202)',
      tag,
      access: 'public',
      before: [limits.reset],
      body: passwordResetRequestSchema,
      responses: { 202: { description: 'Accepted' }, ...errors(429) },
      handler: controller.requestReset,
    }),
    defineRoute({
      method: 'post',
      path: '/api/auth/password-reset/confirm',
      summary: 'Set a new password with the token from the e-mail',
      tag,
      access: 'public',
      before: [limits.reset],
      body: passwordResetConfirmSchema,
      responses: { 204: { description: 'Password set' }, ...errors(429) },
      handler: controller.confirmReset,
    }),
    defineRoute({
      method: 'get',
      path: '/api/auth/invitations/:token',
      summary: 'What an invitation link invites to',
      tag,
      access: 'public',
      params: z.object({ token: z.string().min(1).max(200) }),
      responses: { 200: { description: 'Invitation', schema: invitationPreviewSchema }, ...errors(404) },
      handler: controller.previewInvitation,
    }),
  ];
}
