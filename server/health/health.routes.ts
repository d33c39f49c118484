import { healthSchema, publicConfigSchema } from '../../shared/health';
import type { AppContext } from '../context';
import { databaseIsUp } from '../db/knex';
import { type AnyRouteSpec, defineRoute } from '../http/api-route';

export function healthRoutes(ctx: AppContext): AnyRouteSpec[] {
  const tag = 'Service';
  return [
    defineRoute({
      method: 'get',
      path: '/api/health',
      summary: 'Liveness, version and database status',
      tag,
      access: 'public',
      responses: { 200: { description: 'Health', schema: healthSchema } },
      handler: async (_req, res) => {
        const up = await databaseIsUp(ctx.knex);
        res.json({ status: 'ok', version: ctx.version, database: up ? 'ok' : 'down' });
      },
    }),
    defineRoute({
      method: 'get',
      path: '/api/config/public',
      summary: 'Settings the client needs before sign-in',
      tag,
      access: 'public',
      responses: { 200: { description: 'Public configuration', schema: publicConfigSchema } },
      handler: (_req, res) => {
        res.json({
          registrationOpen: ctx.config.registrationOpen,
          version: ctx.version,
          devMail: ctx.config.devMail,
          passwordMinLength: ctx.config.passwordMinLength,
        });
      },
    }),
  ];
}
