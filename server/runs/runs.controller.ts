import type { Response } from 'express';

import type { ComponentName, CreateRunOutput, SourcesQuery } from '../../shared/runs';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { currentUser } from '../http/guards';
import { sendDownload } from '../http/send-download';
import { imageOf, runOf } from './run-access';
import { streamRunEvents, type RunEventOptions } from './run-events';
import * as runs from './runs.service';

type IdParams = { id: number };
type ComponentQuery = { format: 'float32' | 'fits'; maxSize?: number; image?: number };
type CutoutQuery = { x: number; y: number; size: number; plane: 'image' | ComponentName };

/** A float32 plane view: the bytes, with its size and block factor in the X-Plane-* / X-Source-* headers. */
export function sendPlaneView(res: Response, view: runs.PlaneView): void {
  res.setHeader('Content-Type', 'application/octet-stream');
  res.setHeader('X-Plane-Width', String(view.width));
  res.setHeader('X-Plane-Height', String(view.height));
  res.setHeader('X-Plane-Factor', String(view.factor));
  res.setHeader('X-Source-Width', String(view.sourceWidth));
  res.setHeader('X-Source-Height', String(view.sourceHeight));
  res.send(view.body);
}

export function runsController(ctx: AppContext, eventOptions: RunEventOptions = {}) {
  return {
    async create(req: ApiRequest<CreateRunOutput, IdParams>, res: Response) {
      const run = await runs.createRun(ctx, currentUser(req), imageOf(res), req.body.settings);
      res.status(202).location(`/api/runs/${run.id}`).json({ id: run.id, status: run.status });
    },
    async listForImage(_req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json({ runs: await runs.listRuns(imageOf(res).id) });
    },
    async show(_req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await runs.runDetail(ctx.knex, runOf(res)));
    },
    async cancel(_req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(runs.toRunSummary(await runs.cancelRun(ctx, runOf(res).id)));
    },
    async remove(_req: ApiRequest<unknown, IdParams>, res: Response) {
      await runs.deleteRun(runOf(res).id);
      res.status(204).end();
    },
    events(req: ApiRequest<unknown, IdParams>, res: Response) {
      streamRunEvents(ctx.knex, runOf(res).id, req, res, eventOptions);
    },
    async sources(req: ApiRequest<unknown, { id: number }, SourcesQuery>, res: Response) {
      const { format } = req.query;
      if (format === 'json') res.json(await runs.sourcePage(runOf(res), req.query));
      else sendDownload(res, await runs.sourceDownload(ctx, runOf(res), req.query, format));
    },
    async component(
      req: ApiRequest<unknown, { id: number; name: ComponentName }, ComponentQuery>,
      res: Response,
    ) {
      const run = runOf(res);
      const { name } = req.params;
      const position = req.query.image ?? 1;
      if (req.query.format === 'fits')
        return sendDownload(res, await runs.componentFits(ctx, run, name, position));
      // Results never change once stored: the run, its digest, the image, the plane and the size name the bytes.
      const image = position > 1 ? `-image${position}` : '';
      const etag = `"run-${run.id}-${run.settingsDigest.slice(0, 16)}${image}-${name}-${req.query.maxSize ?? 'full'}"`;
      res.setHeader('ETag', etag);
      res.setHeader('Cache-Control', 'private, max-age=0, must-revalidate');
      if (run.status === 'succeeded' && req.headers['if-none-match'] === etag)
        return void res.status(304).end();
      sendPlaneView(res, await runs.componentView(ctx.knex, run, name, req.query.maxSize, position));
    },
    async cutout(req: ApiRequest<unknown, { id: number }, CutoutQuery>, res: Response) {
      res.json(await runs.cutout(ctx.knex, runOf(res), req.query));
    },
  };
}
