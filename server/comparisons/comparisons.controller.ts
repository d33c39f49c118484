import type { Response } from 'express';

import type {
  CreateComparisonOutput,
  CrossMatchQuery,
  DifferenceQuery,
  UpdateComparisonRequest,
} from '../../shared/comparisons';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { currentUser } from '../http/guards';
import { projectAccessOf } from '../projects/project-access';
import { sendPlaneView } from '../runs/runs.controller';
import { comparisonAccessOf, comparisonOf } from './comparison-access';
import * as comparisons from './comparisons.service';

type IdParams = { id: number };

export function comparisonsController(ctx: AppContext) {
  return {
    async create(req: ApiRequest<CreateComparisonOutput, IdParams>, res: Response) {
      const projectId = projectAccessOf(req).project.id;
      const created = await comparisons.createComparison(currentUser(req), projectId, req.body);
      res
        .status(201)
        .location(`/api/comparisons/${created.id}`)
        .json(await comparisons.comparisonDetail(ctx.knex, created));
    },
    async list(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json({ comparisons: await comparisons.listComparisons(ctx.knex, projectAccessOf(req).project.id) });
    },
    async show(_req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await comparisons.comparisonDetail(ctx.knex, comparisonOf(res)));
    },
    async update(req: ApiRequest<UpdateComparisonRequest, IdParams>, res: Response) {
      res.json(await comparisons.updateComparison(ctx.knex, comparisonOf(res), req.body));
    },
    async remove(req: ApiRequest<unknown, IdParams>, res: Response) {
      await comparisons.deleteComparison(currentUser(req), comparisonAccessOf(res), comparisonOf(res));
      res.status(204).end();
    },
    async difference(req: ApiRequest<unknown, IdParams, DifferenceQuery>, res: Response) {
      const comparison = comparisonOf(res);
      const { a, b, maxSize } = req.query;
      const runs = await comparisons.pairOf(comparison, a, b);
      // Stored results never change: the two runs, their digests and the size name the bytes.
      const digest = (i: 0 | 1) => runs[i].settingsDigest.slice(0, 12);
      const etag = `"difference-${a}-${digest(0)}-${b}-${digest(1)}-${maxSize ?? 'full'}"`;
      res.setHeader('ETag', etag);
      res.setHeader('Cache-Control', 'private, max-age=0, must-revalidate');
      if (req.headers['if-none-match'] === etag) return void res.status(304).end();
      sendPlaneView(res, await comparisons.diffuseDifference(ctx.knex, runs, maxSize));
    },
    async crossMatch(req: ApiRequest<unknown, IdParams, CrossMatchQuery>, res: Response) {
      res.json(await comparisons.crossMatchRuns(ctx.knex, comparisonOf(res), req.query));
    },
  };
}
