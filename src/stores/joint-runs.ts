/**
 * Joint runs from the client: starting one on 2–4 images of a project (POST /api/projects/:id/joint-runs) and
 * reading the component planes of any of its images (?image=N on the component route).
 */
import type { CreateJointRunRequest, JointImageComponent } from '@shared/joint-runs';
import { runCreatedSchema, type ComponentName } from '@shared/runs';
import { api } from '@/boot/api';
import { fetchPlane, type ComponentPlane } from '@/stores/runs';

const id = (value: number) => encodeURIComponent(String(value));

export const jointRunApi = {
  create: (projectId: number, body: CreateJointRunRequest) =>
    api.request('POST', `/api/projects/${id(projectId)}/joint-runs`, { body, schema: runCreatedSchema }),
  /** Block-averaged float32 view of one plane of input image `position` (1 = the reference). */
  component(
    runId: number,
    name: JointImageComponent | ComponentName,
    position: number,
    maxSize = 1024,
  ): Promise<ComponentPlane> {
    const path = `/api/runs/${id(runId)}/components/${encodeURIComponent(name)}?format=float32&maxSize=${maxSize}&image=${position}`;
    return fetchPlane(path, `The ${name} plane of image ${position}`);
  },
  componentFitsUrl: (runId: number, name: JointImageComponent, position: number) =>
    `/api/runs/${id(runId)}/components/${encodeURIComponent(name)}?format=fits&image=${position}`,
};
