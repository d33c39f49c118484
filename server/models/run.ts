import type { Modifiers, RelationMappings } from 'objection';

import type { JointResults, RunKind } from '../../shared/joint-runs';
import type { RunDiagnostics, RunProgress, RunProvenance, RunStatus } from '../../shared/runs';
import { BaseModel } from './base-model';

/** One separation run of an image (migrations/202612020600-create-runs.ts). */
export class Run extends BaseModel {
  static override tableName = 'runs';

  id!: number;
  /** The reference image (image 1) for a joint run. */
  imageId!: number;
  projectId!: number;
  kind!: RunKind;
  /** Joint runs, once succeeded: scale factors, per-image fit details, the common grid. */
  jointResults!: JointResults | null;
  createdBy!: number | null;
  status!: RunStatus;
  requestedSettings!: Record<string, unknown>;
  settings!: Record<string, unknown>;
  settingsDigest!: string;
  progress!: RunProgress | null;
  errorMessage!: string | null;
  attempts!: number;
  cancelRequested!: boolean;
  jobId!: string | null;
  sourceCount!: number | null;
  phasesMs!: Record<string, number> | null;
  provenance!: RunProvenance | null;
  diagnostics!: RunDiagnostics | null;
  resultBytes!: number;
  chargedUserId!: number | null;
  startedAt!: Date | null;
  finishedAt!: Date | null;

  static override jsonAttributes = [
    'requestedSettings',
    'settings',
    'progress',
    'phasesMs',
    'provenance',
    'diagnostics',
    'jointResults',
  ];

  static override modifiers: Modifiers = {
    /** Every column but `diagnostics` (residual histogram, spectrum, convergence trace: the largest one). */
    withoutDiagnostics(query) {
      query.select(
        ...[
          'id',
          'imageId',
          'projectId',
          'kind',
          'jointResults',
          'createdBy',
          'status',
          'requestedSettings',
          'settings',
          'settingsDigest',
          'progress',
          'errorMessage',
          'attempts',
          'cancelRequested',
          'jobId',
          'sourceCount',
          'phasesMs',
          'provenance',
          'resultBytes',
          'chargedUserId',
          'startedAt',
          'finishedAt',
          'createdAt',
          'updatedAt',
        ].map((column) => `runs.${column}`),
      );
    },
  };

  static override relationMappings = (): RelationMappings => ({
    sources: {
      relation: BaseModel.HasManyRelation,
      modelClass: RunSource,
      join: { from: 'runs.id', to: 'run_sources.runId' },
    },
    components: {
      relation: BaseModel.HasManyRelation,
      modelClass: RunComponent,
      join: { from: 'runs.id', to: 'run_components.runId' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['imageId', 'projectId', 'status', 'requestedSettings', 'settings', 'settingsDigest'],
    properties: {
      id: { type: 'integer' },
      imageId: { type: 'integer' },
      projectId: { type: 'integer' },
      createdBy: { type: ['integer', 'null'] },
      status: { enum: ['queued', 'running', 'succeeded', 'failed', 'cancelled'] },
      kind: { enum: ['single', 'joint'] },
      settingsDigest: { type: 'string', minLength: 1 },
      errorMessage: { type: ['string', 'null'] },
      attempts: { type: 'integer', minimum: 0 },
      cancelRequested: { type: 'boolean' },
      resultBytes: { type: 'integer', minimum: 0 },
    },
  };
}

import { RunComponent } from './run-component';
import { RunSource } from './run-source';
