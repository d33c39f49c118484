/**
 * The injection-study and number-counts contract: measuring completeness, flux bias and the false-source rate
 * of a finished run by injecting artificial PSF-shaped sources and separating the trial images with the run's
 * settings; and the differential source counts of a run, raw and corrected for completeness.
 * Shared by the server and the client; no Node imports.
 */
import { z } from 'zod';

export const MAX_INJECTION_LEVELS = 12;
/** Most artificial sources per level; the image may hold fewer per trial image (then more trials are queued). */
export const MAX_SOURCES_PER_LEVEL = 200;
/** Most trial separations (injection trials plus the false-source trial) one study may queue. */
export const MAX_INJECTION_TRIALS = 60;
export const DEFAULT_SOURCES_PER_LEVEL = 20;
/** Default SNR levels: from below the default 5σ threshold to well above it. */
export const DEFAULT_SNR_LEVELS = [3, 5, 8, 15, 40] as const;

export const COMPLETENESS_CAUTION_TEXT =
  'Completeness, flux bias and the false-source rate were measured by injecting artificial sources into this ' +
  'image and re-running the separation with these settings; they hold for this image and these settings only.';

export const injectionStatusSchema = z.enum(['queued', 'running', 'succeeded', 'failed', 'cancelled']);
export type InjectionStatus = z.infer<typeof injectionStatusSchema>;
export const isTerminalInjectionStatus = (status: InjectionStatus): boolean =>
  status === 'succeeded' || status === 'failed' || status === 'cancelled';

export const levelKindSchema = z
  .enum(['snr', 'flux'])
  .describe(
    'snr: levels are signal-to-noise ratios of an isolated point source (flux = SNR × σ / √Σpsf², Gaussian ' +
      'noise only); flux: levels are total fluxes in image units × pixels, as in the catalogue.',
  );
export type LevelKind = z.infer<typeof levelKindSchema>;

export const createInjectionStudySchema = z
  .object({
    levelKind: levelKindSchema.default('snr'),
    levels: z
      .array(z.number().finite().positive('Every level must be a positive number'))
      .min(1, 'Give at least one level')
      .max(MAX_INJECTION_LEVELS, `Give at most ${MAX_INJECTION_LEVELS} levels`)
      .refine((levels) => new Set(levels).size === levels.length, { message: 'Levels must all differ' }),
    sourcesPerLevel: z
      .number()
      .int('Sources per level must be a whole number')
      .min(1, 'Inject at least one source per level')
      .max(MAX_SOURCES_PER_LEVEL, `Inject at most ${MAX_SOURCES_PER_LEVEL} sources per level`)
      .default(DEFAULT_SOURCES_PER_LEVEL),
    seed: z
      .number()
      .int('The seed must be a whole number')
      .min(0)
      .max(2 ** 32 - 1)
      .default(1),
    /** Distance kept from detected sources, other artificial sources and the edge, in PSF FWHMs. */
    radiusFwhm: z.number().finite().min(3, 'Keep sources at least 3 FWHM apart').max(10).default(3),
  })
  .strict();
export type CreateInjectionStudyRequest = z.input<typeof createInjectionStudySchema>;
export type CreateInjectionStudyOutput = z.output<typeof createInjectionStudySchema>;

export const levelResultSchema = z.object({
  level: z.number().int(),
  flux: z.number(),
  /** The level's SNR (flux / flux error of an isolated source), null for Poisson images. */
  snr: z.number().nullable(),
  injected: z.number().int(),
  recovered: z.number().int(),
  completeness: z.number(),
  /** 68.3 % Wilson score interval. */
  completenessLow: z.number(),
  completenessHigh: z.number(),
  fluxBias: z.number().nullable(),
  fluxBiasErr: z.number().nullable(),
  fluxScatter: z.number().nullable(),
  pullMedian: z.number().nullable(),
  pullScatter: z.number().nullable(),
  medianSeparationPixels: z.number().nullable(),
});
export type LevelResultBody = z.infer<typeof levelResultSchema>;

export const falseSourceBinSchema = z.object({
  snrLow: z.number(),
  snrHigh: z.number(),
  count: z.number().int(),
  countLow: z.number(),
  countHigh: z.number(),
  rate: z.number(),
  rateLow: z.number(),
  rateHigh: z.number(),
  real: z.number().int().nullable(),
  reliability: z.number().nullable(),
  reliabilityLow: z.number().nullable(),
  reliabilityHigh: z.number().nullable(),
});

export const areaUnitSchema = z.enum(['deg2', 'pixel2']);
export type AreaUnit = z.infer<typeof areaUnitSchema>;

export const injectionResultsSchema = z.object({
  levels: z.array(levelResultSchema),
  falseSources: z.object({
    bins: z.array(falseSourceBinSchema),
    /** Detections on the subtracted image in total, and those left out as residuals of a subtracted source. */
    detections: z.number().int(),
    residualsExcluded: z.number().int(),
    /** False sources (all SNRs above the threshold) per unit area. */
    totalRate: z.number(),
    totalRateLow: z.number(),
    totalRateHigh: z.number(),
    area: z.number(),
    areaUnit: areaUnitSchema,
  }),
  /** Recovered sources that were neither injected nor detected in the run, summed over injection trials. */
  spuriousInTrials: z.number().int(),
  noiseSigma: z.number().nullable(),
  psfFwhmPx: z.object({ major: z.number(), minor: z.number() }),
  fluxUnit: z.string(),
  threshold: z.number(),
  caution: z.string(),
});
export type InjectionResults = z.infer<typeof injectionResultsSchema>;

export const injectionStudySchema = z.object({
  id: z.number().int(),
  runId: z.number().int(),
  createdBy: z.number().int().nullable(),
  levelKind: levelKindSchema,
  levels: z.array(z.number()),
  fluxes: z.array(z.number()),
  sourcesPerLevel: z.number().int(),
  seed: z.number().int(),
  radiusPixels: z.number(),
  matchRadiusPixels: z.number(),
  status: injectionStatusSchema,
  cancelRequested: z.boolean(),
  trialsTotal: z.number().int(),
  trialsDone: z.number().int(),
  errorMessage: z.string().nullable(),
  results: injectionResultsSchema.nullable(),
  createdAt: z.string(),
  startedAt: z.string().nullable(),
  finishedAt: z.string().nullable(),
  caution: z.string(),
});
export type InjectionStudy = z.infer<typeof injectionStudySchema>;

export const injectedSourceSchema = z.object({
  x: z.number(),
  y: z.number(),
  level: z.number().int(),
  flux: z.number(),
});

export const injectionTrialSchema = z.object({
  id: z.number().int(),
  trialIndex: z.number().int(),
  kind: z.enum(['injection', 'false-source']),
  level: z.number().int().nullable(),
  status: injectionStatusSchema,
  attempts: z.number().int(),
  injected: z.array(injectedSourceSchema),
  /** Recovered injected sources and other detections of this trial (null until it finished). */
  recoveredCount: z.number().int().nullable(),
  detections: z.number().int().nullable(),
  errorMessage: z.string().nullable(),
});
export type InjectionTrial = z.infer<typeof injectionTrialSchema>;

export const injectionStudyDetailSchema = injectionStudySchema.extend({
  trials: z.array(injectionTrialSchema),
});
export type InjectionStudyDetail = z.infer<typeof injectionStudyDetailSchema>;

export const injectionStudyListSchema = z.object({ studies: z.array(injectionStudySchema) });

export const studyParamsSchema = z.object({
  id: z.coerce.number().int().positive(),
  studyId: z.coerce.number().int().positive(),
});

export const studyExportQuerySchema = z.object({
  table: z.enum(['completeness', 'false-sources']).default('completeness'),
  format: z.enum(['csv', 'votable', 'fits']).default('csv'),
});

const binsText = z
  .string()
  .trim()
  .refine(
    (text) =>
      /^\d+$/.test(text) ||
      text.split(',').every((part) => part.trim() !== '' && Number.isFinite(Number(part))),
    { message: 'Give bins as a number of bins (e.g. 8) or comma-separated flux edges (e.g. 0.01,0.02,0.05)' },
  )
  .transform((text): number | number[] =>
    /^\d+$/.test(text) ? Number(text) : text.split(',').map((part) => Number(part)),
  )
  .refine((bins) => (typeof bins === 'number' ? bins >= 1 && bins <= 50 : bins.length >= 2), {
    message: 'Use 1 to 50 bins, or at least two edges',
  })
  .refine((bins) => typeof bins === 'number' || bins.every((edge, k) => k === 0 || edge > bins[k - 1]!), {
    message: 'Bin edges must be strictly increasing',
  });

export const numberCountsQuerySchema = z.object({
  /** A number of logarithmic bins over the catalogue's flux range, or explicit edges. @default 8 */
  bins: binsText.optional(),
  /** The injection study whose completeness corrects the counts; the newest finished one when left out. */
  studyId: z.coerce.number().int().positive().optional(),
  format: z.enum(['json', 'csv', 'votable', 'fits']).default('json'),
});
export type NumberCountsQuery = z.output<typeof numberCountsQuerySchema>;

const valueSchema = z.object({ value: z.number(), low: z.number(), high: z.number() });

export const numberCountsBinSchema = z.object({
  fluxLow: z.number(),
  fluxHigh: z.number(),
  fluxCentre: z.number(),
  count: z.number().int(),
  /** Gehrels (1986) 1σ-equivalent limits on the count. */
  countLow: z.number(),
  countHigh: z.number(),
  /** Sources in the bin per unit area. */
  perArea: valueSchema,
  /** dN/dS: sources per unit flux per unit area. */
  dnds: valueSchema,
  completeness: z.number().nullable(),
  corrected: z.object({ count: z.number(), perArea: valueSchema, dnds: valueSchema }).nullable(),
  correctionNote: z.string().nullable(),
});
export type NumberCountsBin = z.infer<typeof numberCountsBinSchema>;

export const numberCountsSchema = z.object({
  runId: z.number().int(),
  /** deg2 when the image has a celestial WCS (valid pixels × pixel solid angle), else pixel2. */
  areaUnit: areaUnitSchema,
  area: z.number(),
  fluxUnit: z.string(),
  sources: z.number().int(),
  studyId: z.number().int().nullable(),
  bins: z.array(numberCountsBinSchema),
  note: z.string(),
  caution: z.string(),
});
export type NumberCounts = z.infer<typeof numberCountsSchema>;
