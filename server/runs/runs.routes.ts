import {
  componentParamsSchema,
  componentQuerySchema,
  createRunRequestSchema,
  cutoutQuerySchema,
  cutoutSchema,
  imageIdParamsSchema,
  runCreatedSchema,
  runDetailSchema,
  runIdParamsSchema,
  runListSchema,
  runSummarySchema,
  sourcePageSchema,
  sourcesQuerySchema,
} from '../../shared/runs';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { loadImageForRuns, loadRun } from './run-access';
import type { RunEventOptions } from './run-events';
import { runsController } from './runs.controller';

export function runRoutes(ctx: AppContext, eventOptions: RunEventOptions = {}): AnyRouteSpec[] {
  const controller = runsController(ctx, eventOptions);
  const tag = 'Runs';
  return [
    defineRoute({
      method: 'post',
      path: '/api/images/:id/runs',
      summary: 'Start a separation run on an image (editors, owners, admins); answers 202 with the run id',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImageForRuns('editor')],
      body: createRunRequestSchema,
      responses: { 202: { description: 'Queued', schema: runCreatedSchema }, ...errors(403, 404, 413) },
      handler: controller.create,
    }),
    defineRoute({
      method: 'get',
      path: '/api/images/:id/runs',
      summary: 'Runs of an image, newest first',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImageForRuns('viewer')],
      responses: { 200: { description: 'Runs', schema: runListSchema }, ...errors(404) },
      handler: controller.listForImage,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id',
      summary: 'A run: status, progress, timings, error, settings after defaults, provenance, diagnostics',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'Run', schema: runDetailSchema }, ...errors(404) },
      handler: controller.show,
    }),
    defineRoute({
      method: 'post',
      path: '/api/runs/:id/cancel',
      summary: 'Cancel a run: a queued one at once, a running one as soon as its worker notices',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('editor')],
      responses: { 200: { description: 'Run', schema: runSummarySchema }, ...errors(403, 404, 409) },
      handler: controller.cancel,
    }),
    defineRoute({
      method: 'delete',
      path: '/api/runs/:id',
      summary: 'Delete a finished run and its results, freeing their storage (editors, owners, admins)',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('editor')],
      responses: { 204: { description: 'Deleted' }, ...errors(403, 404, 409) },
      handler: controller.remove,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/events',
      summary:
        'Status and progress as Server-Sent Events (event "run"; "end" at a terminal state, then the stream closes)',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'text/event-stream' }, ...errors(404) },
      handler: controller.events,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/sources',
      summary:
        'Catalogue of a finished run: pages with sort and filters, or ?format=csv|votable|fits for the filtered list',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      query: sourcesQuerySchema,
      load: [loadRun('viewer')],
      responses: {
        200: { description: 'Sources (JSON page or a download)', schema: sourcePageSchema },
        ...errors(404, 409),
      },
      handler: controller.sources,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/components/:name',
      summary:
        'A component plane: FITS with the input WCS (?format=fits) or little-endian float32, block-averaged to ?maxSize',
      tag,
      access: 'signed-in',
      params: componentParamsSchema,
      query: componentQuerySchema,
      load: [loadRun('viewer')],
      responses: {
        200: { description: 'application/fits or application/octet-stream (size in X-Plane-Width/Height)' },
        304: { description: 'Not modified (ETag)' },
        ...errors(404, 409),
      },
      handler: controller.component,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/cutout',
      summary: 'Pixel values of a square around (x, y) from the input image or a component',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      query: cutoutQuerySchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'Cutout', schema: cutoutSchema }, ...errors(404, 409) },
      handler: controller.cutout,
    }),
  ];
}
