/**
 * The runs contract: starting a separation run on an image, following it, and reading its results
 * (catalogue pages, component planes, cutouts). Shared by the server and the client; no Node imports.
 */
import { z } from 'zod';

import { catalogueSourceSchema, sourceFlagSchema } from './catalogue';
import { jointRunInfoSchema, runKindSchema } from './joint-runs';
import { separationSettingsInputSchema } from './separation-settings';

export const runStatusSchema = z.enum(['queued', 'running', 'succeeded', 'failed', 'cancelled']);
export type RunStatus = z.infer<typeof runStatusSchema>;

/** A run in one of these states never changes again. */
export const TERMINAL_RUN_STATUSES: readonly RunStatus[] = ['succeeded', 'failed', 'cancelled'];
export const isTerminalRunStatus = (status: RunStatus): boolean => TERMINAL_RUN_STATUSES.includes(status);

/** The image planes a finished run stores (float32, the input's size and WCS). */
export const componentNameSchema = z.enum([
  'diffuse',
  'diffuseSky',
  'compact',
  'compactSky',
  'model',
  'residual',
  'residualNorm',
]);
export type ComponentName = z.infer<typeof componentNameSchema>;
export const COMPONENT_NAMES: readonly ComponentName[] = componentNameSchema.options;

export const createRunRequestSchema = z
  .object({ settings: separationSettingsInputSchema.default({ preset: 'balanced' }) })
  .strict();
export type CreateRunRequest = z.input<typeof createRunRequestSchema>;
export type CreateRunOutput = z.output<typeof createRunRequestSchema>;

export const runProgressSchema = z.object({
  /** 'fit' while the MAP fit runs, 'catalogue' while sources are measured. */
  phase: z.enum(['fit', 'catalogue']),
  /** Fit stage name (diffuse, joint-1, …, final). */
  stage: z.string(),
  iteration: z.number().int().nonnegative(),
  objective: z.number(),
  gradNorm: z.number(),
  /** Rough share of the work done, 0–1 (from the iteration budgets of the stages). */
  fraction: z.number().min(0).max(1),
});
export type RunProgress = z.infer<typeof runProgressSchema>;

export const runProvenanceSchema = z.object({
  softwareName: z.literal('Skysieve'),
  softwareVersion: z.string(),
  settingsDigest: z.string(),
  inputSha256: z.string(),
  inputName: z.string(),
  width: z.number().int(),
  height: z.number().int(),
});
export type RunProvenance = z.infer<typeof runProvenanceSchema>;

export const runSummarySchema = z.object({
  id: z.number().int(),
  imageId: z.number().int(),
  projectId: z.number().int(),
  createdBy: z.number().int().nullable(),
  status: runStatusSchema,
  progress: runProgressSchema.nullable(),
  /** Why the run failed (null otherwise). */
  errorMessage: z.string().nullable(),
  /** How many times a worker started it (more than 1 after a worker was lost). */
  attempts: z.number().int().nonnegative(),
  cancelRequested: z.boolean(),
  sourceCount: z.number().int().nullable(),
  /** 'joint' for a fit of several images together (shared/joint-runs.ts); imageId is then the reference. */
  kind: runKindSchema.optional(),
  timings: z.object({
    queuedAt: z.string(),
    startedAt: z.string().nullable(),
    finishedAt: z.string().nullable(),
    /** Wall time of the fit by phase in milliseconds (noise, fit, catalogue, total), once finished. */
    phasesMs: z.record(z.string(), z.number()).nullable(),
  }),
});
export type RunSummary = z.infer<typeof runSummarySchema>;

export const runDiagnosticsSchema = z.object({
  /** Histogram of (data − model)/σ over valid pixels; a good fit gives a unit normal. */
  residualHistogram: z.object({
    edges: z.array(z.number()),
    counts: z.array(z.number().int()),
    mean: z.number().nullable(),
    std: z.number().nullable(),
    count: z.number().int(),
  }),
  /** Binned power of the diffuse field and the fitted law P(k) = amplitude · (k² + turnover²)^(−slope/2). */
  spectrum: z.object({
    k: z.array(z.number()),
    power: z.array(z.number()),
    mapPower: z.array(z.number()),
    modes: z.array(z.number()),
    fitted: z.array(z.number()),
    amplitude: z.number(),
    slope: z.number(),
    turnover: z.number(),
    estimated: z.boolean(),
  }),
  /** Objective and gradient norm per iteration of every fit stage. */
  convergence: z.array(
    z.object({ stage: z.string(), iteration: z.number(), objective: z.number(), gradNorm: z.number() }),
  ),
  converged: z.boolean(),
  iterations: z.number().int(),
  evaluations: z.number().int(),
  noise: z.object({ sigma: z.number().nullable(), source: z.string().nullable() }),
  psfFwhmPx: z.object({ major: z.number(), minor: z.number() }),
  beamAreaPx: z.number(),
  compactPrior: z.object({
    alpha: z.number(),
    q: z.number(),
    pedestal: z.number(),
    fluxErrorScale: z.number(),
  }),
});
export type RunDiagnostics = z.infer<typeof runDiagnosticsSchema>;

export const runDetailSchema = runSummarySchema.extend({
  /** The settings as sent. */
  requestedSettings: z.record(z.string(), z.unknown()),
  /** Every setting after the preset and defaults. */
  settings: z.record(z.string(), z.unknown()),
  settingsDigest: z.string(),
  provenance: runProvenanceSchema.nullable(),
  diagnostics: runDiagnosticsSchema.nullable(),
  components: z.array(
    z.object({ name: componentNameSchema, width: z.number().int(), height: z.number().int() }),
  ),
  resultBytes: z.number().int(),
  /** Joint runs only: the input images (reference first), their scale factors, the common grid. */
  joint: jointRunInfoSchema.nullable().optional(),
});
export type RunDetail = z.infer<typeof runDetailSchema>;

export const runListSchema = z.object({ runs: z.array(runSummarySchema) });
export const runCreatedSchema = z.object({ id: z.number().int(), status: runStatusSchema });

export const runIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });
export const imageIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });
export const componentParamsSchema = z.object({
  id: z.coerce.number().int().positive(),
  name: componentNameSchema,
});

export const sourceSortSchema = z.enum([
  'id',
  '-id',
  'snr',
  '-snr',
  'flux',
  '-flux',
  'fluxDensity',
  '-fluxDensity',
  'x',
  '-x',
  'y',
  '-y',
  'ra',
  '-ra',
  'dec',
  '-dec',
]);
export type SourceSort = z.infer<typeof sourceSortSchema>;

const optionalNumber = z.coerce.number().finite().optional();

export const sourcesQuerySchema = z
  .object({
    page: z.coerce.number().int().min(1).default(1),
    pageSize: z.coerce.number().int().min(1).max(1000).default(100),
    sort: sourceSortSchema.default('-snr'),
    minSnr: optionalNumber,
    maxSnr: optionalNumber,
    minFlux: optionalNumber,
    maxFlux: optionalNumber,
    /** Comma-separated flags a source must carry, or `none` for sources without flags. */
    flags: z
      .string()
      .optional()
      .refine(
        (text) =>
          text === undefined ||
          text === 'none' ||
          text.split(',').every((flag) => sourceFlagSchema.safeParse(flag.trim()).success),
        { message: `Use a comma-separated list of ${sourceFlagSchema.options.join(', ')}, or none` },
      ),
    format: z.enum(['json', 'csv', 'votable', 'fits']).default('json'),
  })
  .refine((q) => q.minSnr === undefined || q.maxSnr === undefined || q.minSnr <= q.maxSnr, {
    message: 'minSnr must not exceed maxSnr',
  });
export type SourcesQuery = z.output<typeof sourcesQuerySchema>;

export const sourcePageSchema = z.object({
  sources: z.array(catalogueSourceSchema),
  page: z.number().int(),
  pageSize: z.number().int(),
  total: z.number().int(),
  /** The caution that travels with every catalogue. */
  caution: z.string(),
});
export type SourcePage = z.infer<typeof sourcePageSchema>;

export const componentQuerySchema = z.object({
  format: z.enum(['float32', 'fits']).default('float32'),
  /** Longest side of the float32 view; the plane is block-averaged down to fit. */
  maxSize: z.coerce.number().int().min(16).max(8192).optional(),
  /** Joint runs: the input image by position (1 = the reference, the default). */
  image: z.coerce.number().int().min(1).max(4).optional(),
});

export const cutoutQuerySchema = z.object({
  /** Centre in FITS 1-based pixel coordinates. */
  x: z.coerce.number().finite(),
  y: z.coerce.number().finite(),
  size: z.coerce.number().int().min(3).max(512).default(32),
  /** The plane to cut from: the input image or one of the components. */
  plane: z.union([z.literal('image'), componentNameSchema]).default('image'),
});

export const cutoutSchema = z.object({
  plane: z.string(),
  /** FITS 1-based pixel coordinates of the cutout's first pixel. */
  x0: z.number().int(),
  y0: z.number().int(),
  width: z.number().int(),
  height: z.number().int(),
  /** Row-major, x fastest; null where blank or outside the image. */
  values: z.array(z.number().nullable()),
});
export type Cutout = z.infer<typeof cutoutSchema>;

/** One Server-Sent Event `data:` payload of GET /api/runs/:id/events. */
export const runEventSchema = z.object({
  id: z.number().int(),
  status: runStatusSchema,
  progress: runProgressSchema.nullable(),
  errorMessage: z.string().nullable(),
});
export type RunEvent = z.infer<typeof runEventSchema>;
