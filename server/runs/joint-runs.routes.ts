import { createJointRunRequestSchema, type CreateJointRunOutput } from '../../shared/joint-runs';
import { projectIdParamsSchema } from '../../shared/projects';
import { runCreatedSchema } from '../../shared/runs';
import type { AppContext } from '../context';
import { type AnyRouteSpec, type ApiRequest, defineRoute, errors } from '../http/api-route';
import { currentUser } from '../http/guards';
import { loadProject, projectAccessOf } from '../projects/project-access';
import { createJointRun } from './joint-runs.service';

export function jointRunRoutes(ctx: AppContext): AnyRouteSpec[] {
  return [
    defineRoute({
      method: 'post',
      path: '/api/projects/:id/joint-runs',
      summary:
        'Start a joint run: 2–4 images of the project fitted together, the reference first (editors, owners, admins); 202 with the run id, 422 when the engine would refuse the images',
      tag: 'Runs',
      access: 'signed-in',
      params: projectIdParamsSchema,
      load: [loadProject('editor')],
      body: createJointRunRequestSchema,
      responses: { 202: { description: 'Queued', schema: runCreatedSchema }, ...errors(403, 404, 413, 422) },
      handler: async (req: ApiRequest<CreateJointRunOutput, { id: number }>, res) => {
        const run = await createJointRun(ctx, currentUser(req), projectAccessOf(req).project.id, req.body);
        res.status(202).location(`/api/runs/${run.id}`).json({ id: run.id, status: run.status });
      },
    }),
  ];
}
