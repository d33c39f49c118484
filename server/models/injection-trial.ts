import type { InjectedSource, InjectionOutcome } from '../catalogue/completeness';
import type { InjectionStatus } from '../../shared/injection';
import { BaseModel } from './base-model';

/** What a trial's separation found, as stored in `injection_trials.recovered`. */
export type TrialRecovered =
  | {
      kind: 'injection';
      outcomes: InjectionOutcome[];
      /** Recovered sources that are neither injected nor a detected (known) source. */
      spurious: number;
      knownRecovered: number;
      detections: number;
    }
  | {
      kind: 'false-source';
      /** Every catalogue entry of the separation of the source-subtracted image. */
      found: { x: number; y: number; snr: number; flux: number }[];
      detections: number;
    };

/** One queued separation of one trial image of an injection study. */
export class InjectionTrial extends BaseModel {
  static override tableName = 'injection_trials';

  id!: number;
  studyId!: number;
  trialIndex!: number;
  kind!: 'injection' | 'false-source';
  level!: number | null;
  status!: InjectionStatus;
  attempts!: number;
  jobId!: string | null;
  seed!: number | string | null;
  injected!: InjectedSource[];
  recovered!: TrialRecovered | null;
  errorMessage!: string | null;
  startedAt!: Date | null;
  finishedAt!: Date | null;

  static override jsonAttributes = ['injected', 'recovered'];

  static override jsonSchema = {
    type: 'object',
    required: ['studyId', 'trialIndex', 'kind', 'injected'],
    properties: {
      id: { type: 'integer' },
      studyId: { type: 'integer' },
      trialIndex: { type: 'integer', minimum: 0 },
      kind: { enum: ['injection', 'false-source'] },
      level: { type: ['integer', 'null'] },
      status: { enum: ['queued', 'running', 'succeeded', 'failed', 'cancelled'] },
      attempts: { type: 'integer', minimum: 0 },
      errorMessage: { type: ['string', 'null'] },
    },
  };
}
