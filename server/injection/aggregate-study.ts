/**
 * A study's results from its finished trials: completeness with Wilson intervals, flux bias and scatter per
 * level over every injection trial's outcomes (catalogue/completeness.ts completenessByLevel), and the
 * false-source rate per SNR bin from the false-source trial (falseSourceRate). Pure: the trial job calls it
 * inside the transaction that stores the results.
 */
import { COMPLETENESS_CAUTION_TEXT, type InjectionResults } from '../../shared/injection';
import {
  type InjectionOutcome,
  type PixelPoint,
  completenessByLevel,
  falseSourceRate,
} from '../catalogue/completeness';
import { poissonLowerLimit, poissonUpperLimit } from '../catalogue/number-counts';
import type { TrialRecovered } from '../models/injection-trial';
import type { SurveyArea } from './survey-area';

export interface AggregateInput {
  fluxes: readonly number[];
  snrs: readonly (number | null)[];
  trials: readonly (TrialRecovered | null)[];
  knownSources: readonly (PixelPoint & { snr: number })[];
  knownRadiusPixels: number;
  threshold: number;
  area: SurveyArea;
  noiseSigma: number | null;
  psfFwhmPx: { major: number; minor: number };
  fluxUnit: string;
}

/** SNR bin edges of the false-source rate: from the detection threshold up (the last bin is open-ended). */
export function falseSourceEdges(threshold: number): number[] {
  return [1, 1.4, 2, 4, 10, 1e6].map((factor) => factor * threshold);
}

export function aggregateStudy(input: AggregateInput): InjectionResults {
  const outcomes: InjectionOutcome[] = [];
  let spuriousInTrials = 0;
  let falseTrial: Extract<TrialRecovered, { kind: 'false-source' }> | null = null;
  for (const trial of input.trials) {
    if (!trial) continue;
    if (trial.kind === 'injection') {
      outcomes.push(...trial.outcomes);
      spuriousInTrials += trial.spurious;
    } else falseTrial = trial;
  }
  const levels = completenessByLevel(input.fluxes, outcomes).map((result, k) => ({
    ...result,
    snr: input.snrs[k] ?? null,
  }));
  const found = falseTrial?.found ?? [];
  const rate = falseSourceRate(found, {
    snrEdges: falseSourceEdges(input.threshold),
    area: input.area.area,
    subtractedSources: input.knownSources,
    residualRadiusPixels: input.knownRadiusPixels,
    realSnr: input.knownSources.map((source) => source.snr),
  });
  const falseCount = rate.bins.reduce((sum, bin) => sum + bin.count, 0);
  return {
    levels,
    falseSources: {
      bins: rate.bins,
      detections: found.length,
      residualsExcluded: rate.residualsExcluded,
      totalRate: falseCount / input.area.area,
      totalRateLow: poissonLowerLimit(falseCount) / input.area.area,
      totalRateHigh: poissonUpperLimit(falseCount) / input.area.area,
      area: input.area.area,
      areaUnit: input.area.unit,
    },
    spuriousInTrials,
    noiseSigma: input.noiseSigma,
    psfFwhmPx: input.psfFwhmPx,
    fluxUnit: input.fluxUnit,
    threshold: input.threshold,
    caution: COMPLETENESS_CAUTION_TEXT,
  };
}
