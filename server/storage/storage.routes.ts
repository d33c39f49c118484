import { storageUsageSchema } from '../../shared/images';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute } from '../http/api-route';
import { storageUsage } from './storage.service';

/** Administrators' view of storage: usage per account and per project (quotas are changed in PATCH /api/admin/users/:id). */
export function storageRoutes(ctx: AppContext): AnyRouteSpec[] {
  return [
    defineRoute({
      method: 'get',
      path: '/api/admin/storage',
      summary: 'Storage used per account (quota counter, images) and per project',
      tag: 'Administration',
      access: 'admin',
      responses: { 200: { description: 'Usage', schema: storageUsageSchema } },
      handler: async (_req, res) => {
        res.json(await storageUsage(ctx.knex));
      },
    }),
  ];
}
