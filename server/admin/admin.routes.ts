import {
  adminUpdateUserRequestSchema,
  adminUserListSchema,
  adminUserSchema,
  auditPageSchema,
  auditQuerySchema,
  devMailListSchema,
  devMailMessageSchema,
  mailIdParamsSchema,
  userIdParamsSchema,
} from '../../shared/admin';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { adminController } from './admin.controller';

const tag = 'Administration';

export const adminRoutes: AnyRouteSpec[] = [
  defineRoute({
    method: 'get',
    path: '/api/admin/users',
    summary: 'Every account with role, quota and usage',
    tag,
    access: 'admin',
    responses: { 200: { description: 'Users', schema: adminUserListSchema } },
    handler: adminController.users,
  }),
  defineRoute({
    method: 'patch',
    path: '/api/admin/users/:id',
    summary: "Change an account's role, quota or disabled state",
    tag,
    access: 'admin',
    params: userIdParamsSchema,
    body: adminUpdateUserRequestSchema,
    responses: { 200: { description: 'User', schema: adminUserSchema }, ...errors(404) },
    handler: adminController.updateUser,
  }),
  defineRoute({
    method: 'get',
    path: '/api/admin/audit',
    summary: 'The security audit log, newest first',
    tag,
    access: 'admin',
    query: auditQuerySchema,
    responses: { 200: { description: 'One page of events', schema: auditPageSchema } },
    handler: adminController.audit,
  }),
  defineRoute({
    method: 'get',
    path: '/api/admin/mail',
    summary: 'Messages caught by the development mail receiver, newest first',
    tag,
    access: 'admin',
    responses: { 200: { description: 'Messages', schema: devMailListSchema } },
    handler: adminController.mailList,
  }),
  defineRoute({
    method: 'get',
    path: '/api/admin/mail/:id',
    summary: 'One caught message with its text and HTML bodies',
    tag,
    access: 'admin',
    params: mailIdParamsSchema,
    responses: { 200: { description: 'Message', schema: devMailMessageSchema }, ...errors(404) },
    handler: adminController.mail,
  }),
];
