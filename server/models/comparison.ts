import type { RelationMappings } from 'objection';

import type { ComponentName } from '../../shared/runs';
import { BaseModel } from './base-model';

/** A saved side-by-side comparison of 2–4 runs of one image (migrations/202612020717-create-comparisons.ts). */
export class Comparison extends BaseModel {
  static override tableName = 'comparisons';

  id!: number;
  projectId!: number;
  imageId!: number;
  name!: string;
  component!: ComponentName;
  runCount!: number;
  createdBy!: number | null;
  /** The runs in their saved order (position 0 first), when fetched with withGraphFetched('runs'). */
  runs?: Run[];

  static override relationMappings = (): RelationMappings => ({
    runs: {
      relation: BaseModel.ManyToManyRelation,
      modelClass: Run,
      join: {
        from: 'comparisons.id',
        through: { from: 'comparison_runs.comparisonId', to: 'comparison_runs.runId', extra: ['position'] },
        to: 'runs.id',
      },
      modify: (query) => query.modify('withoutDiagnostics').orderBy('comparison_runs.position'),
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['projectId', 'imageId', 'name', 'component', 'runCount'],
    properties: {
      id: { type: 'integer' },
      projectId: { type: 'integer' },
      imageId: { type: 'integer' },
      name: { type: 'string', minLength: 1, maxLength: 120 },
      component: {
        enum: ['diffuse', 'diffuseSky', 'compact', 'compactSky', 'model', 'residual', 'residualNorm'],
      },
      runCount: { type: 'integer', minimum: 2, maximum: 4 },
      createdBy: { type: ['integer', 'null'] },
    },
  };
}

import { Run } from './run';
