import type { Response } from 'express';

import { type QuicklookQuery, quicklookQuerySchema } from '../../shared/quicklook';
import { runIdParamsSchema } from '../../shared/runs';
import type { AppContext } from '../context';
import { type AnyRouteSpec, type ApiRequest, defineRoute, errors } from '../http/api-route';
import { loadRun, runOf } from './run-access';
import { quicklookEtag, quicklookPng } from './quicklook.service';

export function quicklookRoutes(ctx: AppContext): AnyRouteSpec[] {
  return [
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/quicklook.png',
      summary:
        'Quick-look PNG of a finished run: the data or a component, asinh-stretched, with the sources marked by beam ellipses',
      tag: 'Runs',
      access: 'signed-in',
      params: runIdParamsSchema,
      query: quicklookQuerySchema,
      load: [loadRun('viewer')],
      responses: {
        200: { description: 'image/png' },
        304: { description: 'Not modified (ETag)' },
        ...errors(404, 409, 422),
      },
      async handler(req: ApiRequest<unknown, { id: number }, QuicklookQuery>, res: Response) {
        const run = runOf(res);
        const etag = quicklookEtag(run, req.query);
        res.setHeader('Cache-Control', 'private, max-age=0, must-revalidate');
        if (run.status === 'succeeded' && req.headers['if-none-match'] === etag) {
          res.setHeader('ETag', etag);
          return void res.status(304).end();
        }
        const picture = await quicklookPng(ctx.knex, run, req.query);
        res.setHeader('ETag', picture.etag);
        res.setHeader('Content-Type', 'image/png');
        res.setHeader('Content-Disposition', `inline; filename="${picture.fileName}"`);
        res.send(picture.png);
      },
    }),
  ];
}
