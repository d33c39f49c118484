import {
  createInjectionStudySchema,
  injectionStudyDetailSchema,
  injectionStudyListSchema,
  injectionStudySchema,
  numberCountsQuerySchema,
  numberCountsSchema,
  studyExportQuerySchema,
  studyParamsSchema,
} from '../../shared/injection';
import { runIdParamsSchema } from '../../shared/runs';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { loadRun } from '../runs/run-access';
import { injectionController } from './injection.controller';

export function injectionRoutes(ctx: AppContext): AnyRouteSpec[] {
  const controller = injectionController(ctx);
  const tag = 'Completeness';
  return [
    defineRoute({
      method: 'post',
      path: '/api/runs/:id/injection-studies',
      summary:
        'Start a completeness study of a succeeded run: artificial sources at flux or SNR levels, one queued separation per trial image (editors)',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('editor')],
      body: createInjectionStudySchema,
      responses: {
        202: { description: 'Queued', schema: injectionStudySchema },
        ...errors(403, 404, 409, 422),
      },
      handler: controller.create,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/injection-studies',
      summary: 'Injection studies of a run, newest first',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'Studies', schema: injectionStudyListSchema }, ...errors(404) },
      handler: controller.list,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/injection-studies/:studyId',
      summary: 'An injection study: status, trials with what was injected and recovered, results',
      tag,
      access: 'signed-in',
      params: studyParamsSchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'Study', schema: injectionStudyDetailSchema }, ...errors(404) },
      handler: controller.show,
    }),
    defineRoute({
      method: 'post',
      path: '/api/runs/:id/injection-studies/:studyId/cancel',
      summary:
        'Cancel an injection study: queued trials at once, running ones when their worker notices (editors)',
      tag,
      access: 'signed-in',
      params: studyParamsSchema,
      load: [loadRun('editor')],
      responses: { 200: { description: 'Study', schema: injectionStudySchema }, ...errors(403, 404, 409) },
      handler: controller.cancel,
    }),
    defineRoute({
      method: 'delete',
      path: '/api/runs/:id/injection-studies/:studyId',
      summary: 'Delete a finished injection study (editors)',
      tag,
      access: 'signed-in',
      params: studyParamsSchema,
      load: [loadRun('editor')],
      responses: { 204: { description: 'Deleted' }, ...errors(403, 404, 409) },
      handler: controller.remove,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/injection-studies/:studyId/export',
      summary: 'A finished study as a table: ?table=completeness|false-sources&format=csv|votable|fits',
      tag,
      access: 'signed-in',
      params: studyParamsSchema,
      query: studyExportQuerySchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'text/csv, VOTable XML or FITS binary table' }, ...errors(404, 409) },
      handler: controller.exportTable,
    }),
    defineRoute({
      method: 'get',
      path: '/api/runs/:id/number-counts',
      summary:
        'Differential source counts per flux bin per unit area (deg⁻² with a celestial WCS, else pixel⁻²) with Gehrels errors, raw and completeness-corrected; ?format=csv|votable|fits',
      tag,
      access: 'signed-in',
      params: runIdParamsSchema,
      query: numberCountsQuerySchema,
      load: [loadRun('viewer')],
      responses: { 200: { description: 'Counts', schema: numberCountsSchema }, ...errors(404, 409, 422) },
      handler: controller.numberCounts,
    }),
  ];
}
