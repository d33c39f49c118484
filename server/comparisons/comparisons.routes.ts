import {
  comparisonDetailSchema,
  comparisonIdParamsSchema,
  comparisonListSchema,
  comparisonSummarySchema,
  createComparisonRequestSchema,
  crossMatchQuerySchema,
  differenceQuerySchema,
  runCrossMatchSchema,
  updateComparisonRequestSchema,
} from '../../shared/comparisons';
import { projectIdParamsSchema } from '../../shared/projects';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { loadProject } from '../projects/project-access';
import { loadComparison } from './comparison-access';
import { comparisonsController } from './comparisons.controller';

export function comparisonRoutes(ctx: AppContext): AnyRouteSpec[] {
  const controller = comparisonsController(ctx);
  const tag = 'Comparisons';
  return [
    defineRoute({
      method: 'post',
      path: '/api/projects/:id/comparisons',
      summary:
        'Save a comparison of 2–4 succeeded runs of one image of the project (editors, owners, admins); 422 names the run that does not fit',
      tag,
      access: 'signed-in',
      params: projectIdParamsSchema,
      load: [loadProject('editor')],
      body: createComparisonRequestSchema,
      responses: {
        201: { description: 'Saved', schema: comparisonDetailSchema },
        ...errors(403, 404, 422),
      },
      handler: controller.create,
    }),
    defineRoute({
      method: 'get',
      path: '/api/projects/:id/comparisons',
      summary: 'Saved comparisons of a project, newest first',
      tag,
      access: 'signed-in',
      params: projectIdParamsSchema,
      load: [loadProject('viewer')],
      responses: { 200: { description: 'Comparisons', schema: comparisonListSchema }, ...errors(404) },
      handler: controller.list,
    }),
    defineRoute({
      method: 'get',
      path: '/api/comparisons/:id',
      summary: 'A comparison: its runs in order and the resolved settings in which they differ',
      tag,
      access: 'signed-in',
      params: comparisonIdParamsSchema,
      load: [loadComparison('viewer')],
      responses: { 200: { description: 'Comparison', schema: comparisonDetailSchema }, ...errors(404) },
      handler: controller.show,
    }),
    defineRoute({
      method: 'patch',
      path: '/api/comparisons/:id',
      summary: 'Rename a comparison or change the component it shows (editors, owners, admins)',
      tag,
      access: 'signed-in',
      params: comparisonIdParamsSchema,
      load: [loadComparison('editor')],
      body: updateComparisonRequestSchema,
      responses: {
        200: { description: 'Updated', schema: comparisonSummarySchema },
        ...errors(403, 404),
      },
      handler: controller.update,
    }),
    defineRoute({
      method: 'delete',
      path: '/api/comparisons/:id',
      summary: 'Delete a comparison (editors, owners, admins, or the member who saved it); the runs stay',
      tag,
      access: 'signed-in',
      params: comparisonIdParamsSchema,
      load: [loadComparison('viewer')],
      responses: { 204: { description: 'Deleted' }, ...errors(403, 404) },
      handler: controller.remove,
    }),
    defineRoute({
      method: 'get',
      path: '/api/comparisons/:id/difference',
      summary:
        'diffuse(a) − diffuse(b) of two of its runs as little-endian float32, block-averaged to ?maxSize (size in X-Plane-Width/Height)',
      tag,
      access: 'signed-in',
      params: comparisonIdParamsSchema,
      query: differenceQuerySchema,
      load: [loadComparison('viewer')],
      responses: {
        200: { description: 'application/octet-stream (size in X-Plane-Width/Height)' },
        304: { description: 'Not modified (ETag)' },
        ...errors(404, 409, 422),
      },
      handler: controller.difference,
    }),
    defineRoute({
      method: 'get',
      path: '/api/comparisons/:id/cross-match',
      summary:
        'Cross-match of the catalogues of two of its runs: matched pairs with both fluxes, sources only in one, offsets, flux ratio',
      tag,
      access: 'signed-in',
      params: comparisonIdParamsSchema,
      query: crossMatchQuerySchema,
      load: [loadComparison('viewer')],
      responses: { 200: { description: 'Cross-match', schema: runCrossMatchSchema }, ...errors(404, 422) },
      handler: controller.crossMatch,
    }),
  ];
}
