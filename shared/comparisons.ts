/**
 * The comparisons contract: 2–4 finished runs of one image saved side by side with the component to show, the
 * table of settings in which they differ, the difference of two runs' diffuse fields, and the cross-match of two
 * runs' catalogues. Shared by the server and the client; no Node imports.
 */
import { z } from 'zod';

import { componentNameSchema, runSummarySchema } from './runs';
import { stableSettingsJson } from './separation-settings';

export const COMPARISON_MIN_RUNS = 2;
export const COMPARISON_MAX_RUNS = 4;

/**
 * Why a list of run ids cannot make a comparison (count, repeats), or null when it can. The server answers 422
 * with this message; the client uses it to enable its "Compare" button.
 */
export function runSelectionProblem(runIds: readonly number[]): string | null {
  if (runIds.length < COMPARISON_MIN_RUNS || runIds.length > COMPARISON_MAX_RUNS) {
    return `Choose between ${COMPARISON_MIN_RUNS} and ${COMPARISON_MAX_RUNS} runs to compare (${runIds.length} chosen).`;
  }
  const repeated = runIds.find((id, index) => runIds.indexOf(id) !== index);
  if (repeated !== undefined) return `Run ${repeated} is listed twice; choose each run once.`;
  return null;
}

const comparisonNameSchema = z
  .string()
  .trim()
  .min(1, 'Give the comparison a name.')
  .max(120, 'Keep the name to 120 characters or fewer.');

const runIdSchema = z.number().int().positive();

export const createComparisonRequestSchema = z
  .object({
    name: comparisonNameSchema,
    /** In the order the runs are shown; 2–4 distinct finished runs of one image of the project. */
    runIds: z.array(runIdSchema).max(20, 'Choose between 2 and 4 runs to compare.'),
    component: componentNameSchema.default('diffuse'),
  })
  .strict();
export type CreateComparisonRequest = z.input<typeof createComparisonRequestSchema>;
export type CreateComparisonOutput = z.output<typeof createComparisonRequestSchema>;

export const updateComparisonRequestSchema = z
  .object({ name: comparisonNameSchema.optional(), component: componentNameSchema.optional() })
  .strict()
  .refine((body) => body.name !== undefined || body.component !== undefined, {
    message: 'Send a new name, a new component, or both.',
  });
export type UpdateComparisonRequest = z.infer<typeof updateComparisonRequestSchema>;

export const comparisonIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });

/**
 * Labels (and units) of the resolved settings, as the settings-difference table shows them, in table order.
 * Keyed by name rather than typed to ResolvedSeparationSettings, so that a setting added later still shows
 * (under its own name, after these) before a label is written for it.
 */
export const SETTING_LABELS: Record<string, { label: string; unit?: string }> = {
  preset: { label: 'Preset' },
  likelihood: { label: 'Noise model' },
  psf: { label: 'PSF (FWHM major × minor, position angle)', unit: 'px, °' },
  noiseSigma: { label: 'Noise σ', unit: 'image units' },
  compactAlpha: { label: 'Caution about compact sources (inverse-gamma α)' },
  compactScale: { label: 'Compact-source prior scale (inverse-gamma q)', unit: 'flux errors' },
  diffuseAmplitude: { label: 'Diffuse power at the largest scales', unit: 'nats² per mode' },
  diffuseSlope: { label: 'Diffuse spectrum slope γ' },
  threshold: { label: 'Detection threshold', unit: 'SNR' },
  seedSnr: { label: 'Seeding level', unit: 'matched-filter SNR' },
  seedRounds: { label: 'Seeding rounds' },
  maxIterations: { label: 'Iteration budget of the final stage' },
  absoluteDecrease: { label: 'Stopping decrease per iteration', unit: 'nats' },
  settleTolerance: { label: 'Settling tolerance over 10 iterations', unit: 'noise σ' },
};

const SETTING_ORDER = Object.keys(SETTING_LABELS);

/** A setting's value as the table shows it; null means the run estimated it (or took it from the header). */
export function formatSettingValue(key: string, value: unknown): string {
  if (value === null || value === undefined)
    return key === 'psf' ? 'from the image header' : 'estimated from the data';
  if (key === 'psf' && typeof value === 'object') {
    const psf = value as { fwhmMajor?: number; fwhmMinor?: number; pa?: number };
    return `${psf.fwhmMajor} × ${psf.fwhmMinor} px, ${psf.pa}°`;
  }
  if (key === 'likelihood') return value === 'poisson' ? 'Poisson (counts)' : 'Gaussian (maps)';
  if (typeof value === 'object') return stableSettingsJson(value);
  return String(value);
}

export const settingDifferenceSchema = z.object({
  key: z.string(),
  label: z.string(),
  unit: z.string().nullable(),
  /** One value per run, in the comparison's order (null: estimated / from the header). */
  values: z.array(z.unknown()),
  /** The same values as text. */
  display: z.array(z.string()),
});
export type SettingDifference = z.infer<typeof settingDifferenceSchema>;

/**
 * The resolved settings in which the runs differ, in the order of SETTING_LABELS (then any other key
 * alphabetically); values are compared by their stable JSON, so { a, b } equals { b, a }.
 */
export function settingsDifference(settings: readonly Record<string, unknown>[]): SettingDifference[] {
  const keys = new Set<string>();
  for (const entry of settings) for (const key of Object.keys(entry)) keys.add(key);
  const known = SETTING_ORDER.filter((key) => keys.has(key));
  const others = [...keys].filter((key) => !(key in SETTING_LABELS)).sort();
  const out: SettingDifference[] = [];
  for (const key of [...known, ...others]) {
    const values = settings.map((entry) => entry[key] ?? null);
    const texts = new Set(values.map((value) => stableSettingsJson(value)));
    if (texts.size <= 1) continue;
    const meta = SETTING_LABELS[key];
    out.push({
      key,
      label: meta?.label ?? key,
      unit: meta?.unit ?? null,
      values,
      display: values.map((value) => formatSettingValue(key, value)),
    });
  }
  return out;
}

export const comparisonSummarySchema = z.object({
  id: z.number().int(),
  projectId: z.number().int(),
  imageId: z.number().int(),
  imageName: z.string(),
  name: z.string(),
  component: componentNameSchema,
  /** The runs still present, in the comparison's order. */
  runIds: z.array(z.number().int()),
  /** How many runs it was saved with; more than runIds.length when runs were deleted since. */
  runCount: z.number().int(),
  createdBy: z.number().int().nullable(),
  createdByName: z.string().nullable(),
  createdAt: z.string(),
  updatedAt: z.string(),
});
export type ComparisonSummary = z.infer<typeof comparisonSummarySchema>;

export const comparisonRunSchema = runSummarySchema.extend({
  settings: z.record(z.string(), z.unknown()),
  settingsDigest: z.string(),
});
export type ComparisonRun = z.infer<typeof comparisonRunSchema>;

export const comparisonDetailSchema = comparisonSummarySchema.extend({
  runs: z.array(comparisonRunSchema),
  settingsDifference: z.array(settingDifferenceSchema),
  /** Set when runs were deleted since the comparison was saved. */
  note: z.string().nullable(),
});
export type ComparisonDetail = z.infer<typeof comparisonDetailSchema>;

export const comparisonListSchema = z.object({ comparisons: z.array(comparisonSummarySchema) });

/** Two runs of the comparison, a first and a second (the difference is first − second). */
const pairQuery = {
  a: z.coerce.number().int().positive(),
  b: z.coerce.number().int().positive(),
};

export const differenceQuerySchema = z
  .object({
    ...pairQuery,
    /** Longest side of the float32 view; the difference is block-averaged down to fit. */
    maxSize: z.coerce.number().int().min(16).max(8192).optional(),
  })
  .refine((query) => query.a !== query.b, { message: 'Choose two different runs (a and b).' });
export type DifferenceQuery = z.output<typeof differenceQuerySchema>;

export const crossMatchQuerySchema = z
  .object({
    ...pairQuery,
    /** Match radius on the sky; default half the geometric-mean beam FWHM. */
    radiusArcsec: z.coerce.number().positive().max(3600).optional(),
    /** Match radius in pixels, for images without a celestial WCS; default half the PSF FWHM. */
    radiusPixels: z.coerce.number().positive().max(10000).optional(),
  })
  .refine((query) => query.a !== query.b, { message: 'Choose two different runs (a and b).' });
export type CrossMatchQuery = z.output<typeof crossMatchQuerySchema>;

export const matchedSourceSchema = z.object({
  id: z.number().int(),
  x: z.number(),
  y: z.number(),
  ra: z.number().nullable(),
  dec: z.number().nullable(),
  /** The flux compared (flux density when both runs have it, else the integrated flux), with its error. */
  flux: z.number(),
  fluxErr: z.number(),
  snr: z.number(),
});
export type MatchedSource = z.infer<typeof matchedSourceSchema>;

export const runCrossMatchSchema = z.object({
  a: z.number().int(),
  b: z.number().int(),
  mode: z.enum(['sky', 'pixel']),
  /** Unit of radius, separations and offsets. */
  unit: z.enum(['arcsec', 'pixel']),
  radius: z.number(),
  /** Where the radius came from: given in the request, half the beam, or half the PSF FWHM in pixels. */
  radiusSource: z.enum(['given', 'beam', 'psf']),
  /** 'fluxDensity' when both catalogues carry flux densities, else 'flux'. */
  fluxKind: z.enum(['fluxDensity', 'flux']),
  fluxUnit: z.string().nullable(),
  counts: z.object({
    a: z.number().int(),
    b: z.number().int(),
    matched: z.number().int(),
    onlyA: z.number().int(),
    onlyB: z.number().int(),
  }),
  pairs: z.array(
    z.object({
      a: matchedSourceSchema,
      b: matchedSourceSchema,
      separation: z.number(),
      /** a − b: ΔRA·cos Dec and ΔDec (sky, arcsec) or Δx and Δy (pixels). */
      offset1: z.number(),
      offset2: z.number(),
      /** a's flux / b's flux. */
      fluxRatio: z.number().nullable(),
    }),
  ),
  onlyA: z.array(matchedSourceSchema),
  onlyB: z.array(matchedSourceSchema),
  offsets: z.object({
    count: z.number().int(),
    mean1: z.number().nullable(),
    mean1Err: z.number().nullable(),
    mean2: z.number().nullable(),
    mean2Err: z.number().nullable(),
    rms1: z.number().nullable(),
    rms2: z.number().nullable(),
    rmsSeparation: z.number().nullable(),
  }),
  fluxRatio: z.object({
    count: z.number().int(),
    median: z.number().nullable(),
    medianErr: z.number().nullable(),
    robustScatter: z.number().nullable(),
  }),
  /** Read this before drawing conclusions from the match. */
  caution: z.string(),
});
export type RunCrossMatch = z.infer<typeof runCrossMatchSchema>;
