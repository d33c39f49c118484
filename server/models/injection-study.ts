import type { RelationMappings } from 'objection';

import type { InjectionResults, InjectionStatus, LevelKind } from '../../shared/injection';
import { BaseModel } from './base-model';

/** One completeness-and-reliability study of a run (migrations/202612020745-create-injection-studies.ts). */
export class InjectionStudy extends BaseModel {
  static override tableName = 'injection_studies';

  id!: number;
  runId!: number;
  projectId!: number;
  createdBy!: number | null;
  levelKind!: LevelKind;
  levels!: number[];
  fluxes!: number[];
  sourcesPerLevel!: number;
  /** bigint column: node-postgres reads it as text. */
  seed!: number | string;
  radiusPixels!: number;
  matchRadiusPixels!: number;
  status!: InjectionStatus;
  cancelRequested!: boolean;
  trialsTotal!: number;
  trialsDone!: number;
  results!: InjectionResults | null;
  errorMessage!: string | null;
  startedAt!: Date | null;
  finishedAt!: Date | null;

  static override jsonAttributes = ['levels', 'fluxes', 'results'];

  static override relationMappings = (): RelationMappings => ({
    trials: {
      relation: BaseModel.HasManyRelation,
      modelClass: InjectionTrial,
      join: { from: 'injection_studies.id', to: 'injection_trials.studyId' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['runId', 'projectId', 'levelKind', 'levels', 'fluxes', 'sourcesPerLevel', 'seed'],
    properties: {
      id: { type: 'integer' },
      runId: { type: 'integer' },
      projectId: { type: 'integer' },
      createdBy: { type: ['integer', 'null'] },
      levelKind: { enum: ['snr', 'flux'] },
      sourcesPerLevel: { type: 'integer', minimum: 1 },
      radiusPixels: { type: 'number', exclusiveMinimum: 0 },
      matchRadiusPixels: { type: 'number', exclusiveMinimum: 0 },
      status: { enum: ['queued', 'running', 'succeeded', 'failed', 'cancelled'] },
      trialsTotal: { type: 'integer', minimum: 0 },
      trialsDone: { type: 'integer', minimum: 0 },
      errorMessage: { type: ['string', 'null'] },
    },
  };
}

import { InjectionTrial } from './injection-trial';
