import {
  crossMatchExportQuerySchema,
  crossMatchRequestSchema,
  crossMatchResultSchema,
  REFERENCE_CATALOGUE_MAX_BYTES,
  referenceCatalogueDetailSchema,
  referenceCatalogueListSchema,
  referenceCatalogueParamsSchema,
  referencePreviewSchema,
  referenceReadOptionsSchema,
} from '../../shared/cross-match';
import { projectIdParamsSchema } from '../../shared/projects';
import { runIdParamsSchema } from '../../shared/runs';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { loadProject } from '../projects/project-access';
import { loadRun } from '../runs/run-access';
import { crossMatchController } from './cross-match.controller';
import { receiveReferenceFile } from './receive-reference';

const fileDescription =
  'multipart/form-data (field "file"; optional text fields name, format, positions, mapping as JSON) or the file ' +
  'as the body (Content-Type text/csv or application/x-votable+xml, options in the query string)';

export function crossMatchRoutes(ctx: AppContext): AnyRouteSpec[] {
  const controller = crossMatchController(ctx);
  const maxBytes = Math.min(REFERENCE_CATALOGUE_MAX_BYTES, ctx.config.uploadMaxBytes);
  const tag = 'Cross-match';
  // Preview and upload read the same file the same way, with the same rights.
  const readsReferenceFile = () => ({
    tag,
    access: 'signed-in' as const,
    params: projectIdParamsSchema,
    query: referenceReadOptionsSchema,
    // The role check comes before the body is read, so nobody without the right sends a file into memory.
    load: [loadProject('editor'), receiveReferenceFile(maxBytes)],
  });
  return [
    defineRoute({
      method: 'post',
      path: '/api/projects/:id/reference-catalogues/preview',
      summary: `How a reference catalogue file would be read (columns, mapping, first rows, rejected rows); nothing is stored. ${fileDescription}`,
      ...readsReferenceFile(),
      responses: {
        200: { description: 'Preview', schema: referencePreviewSchema },
        ...errors(403, 404, 413, 422),
      },
      handler: controller.preview,
    }),
    defineRoute({
      method: 'post',
      path: '/api/projects/:id/reference-catalogues',
      summary: `Upload a reference catalogue (CSV or VOTable TABLEDATA), charged to the project owner's quota. ${fileDescription}`,
      ...readsReferenceFile(),
      responses: {
        201: { description: 'Stored', schema: referenceCatalogueDetailSchema },
        ...errors(403, 404, 413, 422),
      },
      handler: controller.upload,
    }),
    defineRoute({
      method: 'get',
      path: '/api/projects/:id/reference-catalogues',
      summary: 'Reference catalogues of a project, newest first',
      tag,
      access: 'signed-in',
      params: projectIdParamsSchema,
      load: [loadProject('viewer')],
      responses: { 200: { description: 'Catalogues', schema: referenceCatalogueListSchema }, ...errors(404) },
      handler: controller.list,
    }),
    defineRoute({
      method: 'get',
      path: '/api/projects/:id/reference-catalogues/:catalogueId',
      summary: 'A reference catalogue: columns, mapping used, counts, the rejected-row report, first entries',
      tag,
      access: 'signed-in',
      params: referenceCatalogueParamsSchema,
      load: [loadProject('viewer')],
      responses: {
        200: { description: 'Catalogue', schema: referenceCatalogueDetailSchema },
        ...errors(404),
      },
      handler: controller.show,
    }),
    defineRoute({
      method: 'delete',
      path: '/api/projects/:id/reference-catalogues/:catalogueId',
      summary: "Delete a reference catalogue; its bytes are released from the charged account's quota",
      tag,
      access: 'signed-in',
      params: referenceCatalogueParamsSchema,
      load: [loadProject('editor')],
      responses: { 204: { description: 'Deleted' }, ...errors(403, 404) },
      handler: controller.remove,
    }),
    defineRoute({
      method: 'post',
      path: '/api/runs/:id/cross-match',
      summary:
        'Match a finished run against a reference catalogue or another run of its project: pairs, unmatched on ' +
        'each side, offsets, flux ratios, the radius used (default half the beam FWHM)',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('viewer')],
      body: crossMatchRequestSchema,
      responses: {
        200: { description: 'Match', schema: crossMatchResultSchema },
        ...errors(404, 409, 422),
      },
      handler: controller.match,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/cross-match',
      summary:
        'The matched table as a download (?kind=reference|run&against=<id>&format=csv|votable|fits, optional radius)',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      query: crossMatchExportQuerySchema,
      load: [loadRun('viewer')],
      responses: {
        200: { description: 'text/csv, application/x-votable+xml or application/fits' },
        ...errors(404, 409, 422),
      },
      handler: controller.download,
    }),
  ];
}
