import {
  apiTokenListSchema,
  createdTokenSchema,
  createTokenRequestSchema,
  tokenIdParamsSchema,
} from '../../shared/tokens';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { tokensController } from './tokens.controller';

const tag = 'API tokens';

export const tokenRoutes: AnyRouteSpec[] = [
  defineRoute({
    method: 'get',
    path: '/api/tokens',
    summary: 'My API tokens',
    tag,
    access: 'signed-in',
    responses: { 200: { description: 'Tokens', schema: apiTokenListSchema } },
    handler: tokensController.list,
  }),
  defineRoute({
    method: 'post',
    path: '/api/tokens',
    summary: 'Create an API token (the plaintext is shown once)',
    tag,
    access: 'signed-in',
    body: createTokenRequestSchema,
    responses: { 201: { description: 'Created', schema: createdTokenSchema } },
    handler: tokensController.create,
  }),
  defineRoute({
    method: 'delete',
    path: '/api/tokens/:id',
    summary: 'Revoke an API token',
    tag,
    access: 'signed-in',
    params: tokenIdParamsSchema,
    responses: { 204: { description: 'Revoked' }, ...errors(404) },
    handler: tokensController.revoke,
  }),
];
