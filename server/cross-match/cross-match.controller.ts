import type { Response } from 'express';

import {
  type CrossMatchExportQuery,
  type CrossMatchRequest,
  referenceReadOptionsSchema,
  type ReferenceReadOptions,
} from '../../shared/cross-match';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { AppError } from '../http/app-error';
import { toFieldIssues } from '../http/validate';
import { currentUser } from '../http/guards';
import { sendDownload } from '../http/send-download';
import { projectAccessOf } from '../projects/project-access';
import { runOf } from '../runs/run-access';
import * as matching from './cross-match.service';
import { referenceFileOf } from './receive-reference';
import * as references from './reference-catalogues.service';

type IdParams = { id: number };
type CatalogueParams = { id: number; catalogueId: number };

/** Options from the query string, overridden by multipart text fields (validated with the same schema). */
function readOptions(query: ReferenceReadOptions, fields: Record<string, string>): ReferenceReadOptions {
  if (Object.keys(fields).length === 0) return query;
  const parsed = referenceReadOptionsSchema.safeParse(fields);
  if (!parsed.success) {
    const issues = toFieldIssues(parsed.error);
    const first = issues[0];
    throw new AppError(
      'validation_failed',
      first ? `${first.path.join('.')}: ${first.message}` : 'The upload fields are not valid.',
      { issues },
    );
  }
  return { ...query, ...Object.fromEntries(Object.entries(parsed.data).filter(([, v]) => v !== undefined)) };
}

export function crossMatchController(ctx: AppContext) {
  return {
    preview(req: ApiRequest<unknown, IdParams, ReferenceReadOptions>, res: Response) {
      const file = referenceFileOf(res);
      const options = readOptions(req.query, file.fields);
      res.json(references.previewCatalogue(file.bytes, options.fileName ?? file.originalName, options));
    },
    async upload(req: ApiRequest<unknown, IdParams, ReferenceReadOptions>, res: Response) {
      const file = referenceFileOf(res);
      const options = readOptions(req.query, file.fields);
      const { project } = projectAccessOf(req);
      const detail = await references.uploadCatalogue(
        currentUser(req),
        project,
        file.bytes,
        file.originalName,
        options,
      );
      res.status(201).location(`/api/projects/${project.id}/reference-catalogues/${detail.id}`).json(detail);
    },
    async list(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json({ referenceCatalogues: await references.listCatalogues(req.params.id) });
    },
    async show(req: ApiRequest<unknown, CatalogueParams>, res: Response) {
      res.json(await references.catalogueDetail(req.params.id, req.params.catalogueId));
    },
    async remove(req: ApiRequest<unknown, CatalogueParams>, res: Response) {
      await references.deleteCatalogue(req.params.id, req.params.catalogueId);
      res.status(204).end();
    },
    async match(req: ApiRequest<CrossMatchRequest, IdParams>, res: Response) {
      res.json(await matching.crossMatch(ctx, runOf(res), req.body));
    },
    async download(req: ApiRequest<unknown, IdParams, CrossMatchExportQuery>, res: Response) {
      const { kind, against, radiusArcsec, radiusPixels, format } = req.query;
      const request: CrossMatchRequest = { against: { kind, id: against }, radiusArcsec, radiusPixels };
      sendDownload(res, await matching.crossMatchDownload(ctx, runOf(res), request, format));
    },
  };
}
