/**
 * Settings of one separation run, shared by the engine, the command line, the service and the client.
 * A run names a preset and may override any advanced field; `resolveSettings` applies the preset and the
 * defaults and returns every value, so a run record can list all settings after defaults.
 * No Node imports here (the browser uses this file); the SHA-256 digest of `stableSettingsJson` is taken
 * server-side (server/engine/separate.ts, `settingsDigest`).
 */
import { z } from 'zod';

export const separationPresetSchema = z
  .enum(['balanced', 'deep-search', 'structured-background'])
  .describe(
    'Starting point for the settings. balanced: works on most images. deep-search: tries harder to find faint ' +
      'sources (more seeding rounds, a lower seeding level) at the cost of run time. structured-background: for ' +
      'bright, knotty extended emission: compact sources must be more convincing before they are kept apart ' +
      'from the diffuse field.',
  );
export type SeparationPreset = z.infer<typeof separationPresetSchema>;

const positive = z.number().positive().finite();

export const psfSettingSchema = z
  .object({
    fwhmMajor: positive.describe('PSF full width at half maximum along its major axis, in pixels.'),
    fwhmMinor: positive.describe('PSF full width at half maximum along its minor axis, in pixels.'),
    pa: z
      .number()
      .finite()
      .describe('Position angle of the major axis in degrees, from north (up) through east (left).'),
  })
  .refine((p) => p.fwhmMinor <= p.fwhmMajor, {
    message: 'PSF minor-axis FWHM must not exceed the major-axis FWHM',
  })
  .describe('Gaussian PSF. Leave out to use the beam from the image header (BMAJ, BMIN, BPA).');

export const separationSettingsInputSchema = z
  .object({
    preset: separationPresetSchema.default('balanced'),
    likelihood: z
      .enum(['gaussian', 'poisson'])
      .optional()
      .describe('Noise model: gaussian for maps with additive noise, poisson for photon-counts images.'),
    psf: psfSettingSchema.nullable().optional(),
    noiseSigma: positive
      .nullable()
      .optional()
      .describe('Gaussian noise σ in image units. Leave out to estimate it robustly from the image.'),
    compactAlpha: positive
      .min(0.5)
      .max(20)
      .optional()
      .describe(
        'Shape of the prior on compact-source pixels (inverse-gamma α). Larger values make the fit more ' +
          'reluctant to put light into compact sources: fewer faint detections and fewer false ones; smaller ' +
          'values let more faint sources through.',
      ),
    compactScale: positive
      .max(10)
      .optional()
      .describe(
        'Scale of the prior on compact-source pixels (inverse-gamma q), in units of the flux error of a single ' +
          'isolated source. Every pixel that holds no source keeps a tiny level q/α, which is reported as part ' +
          'of the diffuse component; larger values raise that level and make faint sources slightly easier to ' +
          'switch on.',
      ),
    diffuseAmplitude: positive
      .nullable()
      .optional()
      .describe(
        'Power of the diffuse field at its largest scales (nats² per mode). Leave out to estimate it from the ' +
          'image (recommended). Higher values allow more contrast in the diffuse emission.',
      ),
    diffuseSlope: z
      .number()
      .min(1)
      .max(8)
      .nullable()
      .optional()
      .describe(
        'Power-law slope γ of the diffuse spectrum, P(k) ∝ k^−γ. Leave out to estimate it. Larger values make ' +
          'the diffuse field smoother; smaller values let it follow finer structure (and take light from faint ' +
          'sources).',
      ),
    threshold: positive
      .max(1000)
      .optional()
      .describe(
        'Detection threshold: minimum SNR (significance for counts images) for a catalogue entry. Default 5.',
      ),
    seedSnr: positive
      .max(100)
      .optional()
      .describe('Matched-filter SNR at which a residual peak is tried as a compact source during the fit.'),
    seedRounds: z
      .number()
      .int()
      .min(1)
      .max(6)
      .optional()
      .describe('How many times residual peaks are seeded.'),
    maxIterations: z
      .number()
      .int()
      .min(10)
      .max(20000)
      .optional()
      .describe('Iteration budget of the final fit stage (earlier stages get a third of it).'),
    absoluteDecrease: positive
      .max(10)
      .optional()
      .describe(
        'A fit stage stops when the objective falls by less than this (nats) per iteration, three times running.',
      ),
    settleTolerance: positive
      .max(10)
      .optional()
      .describe(
        'A fit stage also stops once the fitted image has settled: over 10 iterations the model and the compact ' +
          'component moved by less than this many noise σ (RMS over the pixels). Smaller values fit longer for ' +
          'changes too small to see in the results. Default 0.01.',
      ),
  })
  .strict();
export type SeparationSettingsInput = z.input<typeof separationSettingsInputSchema>;

/** Every setting after the preset and defaults; null means "estimated from the data" / "from the header". */
export interface ResolvedSeparationSettings {
  preset: SeparationPreset;
  likelihood: 'gaussian' | 'poisson';
  psf: { fwhmMajor: number; fwhmMinor: number; pa: number } | null;
  noiseSigma: number | null;
  compactAlpha: number;
  compactScale: number;
  diffuseAmplitude: number | null;
  diffuseSlope: number | null;
  threshold: number;
  seedSnr: number;
  seedRounds: number;
  maxIterations: number;
  absoluteDecrease: number;
  settleTolerance: number;
}

type PresetValues = Omit<ResolvedSeparationSettings, 'preset' | 'likelihood' | 'psf' | 'noiseSigma'>;

const common: PresetValues = {
  compactAlpha: 1.5,
  compactScale: 0.05,
  diffuseAmplitude: null,
  diffuseSlope: null,
  // 5σ: the usual detection level in survey catalogues (common practice).
  threshold: 5,
  seedSnr: 3,
  seedRounds: 2,
  maxIterations: 300,
  absoluteDecrease: 0.01,
  // RMS σ over 10 iterations; staged-fit.ts `changeTolerance` (chosen by measurement on the acceptance skies)
  settleTolerance: 0.01,
};

export const SEPARATION_PRESETS: Record<SeparationPreset, PresetValues> = {
  balanced: common,
  'deep-search': { ...common, compactAlpha: 1.25, seedSnr: 2.5, seedRounds: 3, maxIterations: 500 },
  'structured-background': { ...common, compactAlpha: 2.5, seedSnr: 4, seedRounds: 2 },
};

/** Parses (throws a ZodError with readable messages on bad input) and fills in every value. */
export function resolveSettings(input: unknown = {}): ResolvedSeparationSettings {
  const parsed = separationSettingsInputSchema.parse(input ?? {});
  const base = SEPARATION_PRESETS[parsed.preset];
  return {
    preset: parsed.preset,
    likelihood: parsed.likelihood ?? 'gaussian',
    psf: parsed.psf ?? null,
    noiseSigma: parsed.noiseSigma ?? null,
    compactAlpha: parsed.compactAlpha ?? base.compactAlpha,
    compactScale: parsed.compactScale ?? base.compactScale,
    diffuseAmplitude: parsed.diffuseAmplitude ?? base.diffuseAmplitude,
    diffuseSlope: parsed.diffuseSlope ?? base.diffuseSlope,
    threshold: parsed.threshold ?? base.threshold,
    seedSnr: parsed.seedSnr ?? base.seedSnr,
    seedRounds: parsed.seedRounds ?? base.seedRounds,
    maxIterations: parsed.maxIterations ?? base.maxIterations,
    absoluteDecrease: parsed.absoluteDecrease ?? base.absoluteDecrease,
    settleTolerance: parsed.settleTolerance ?? base.settleTolerance,
  };
}

/** JSON with object keys sorted at every level: the same settings always give the same text (and digest). */
export function stableSettingsJson(value: unknown): string {
  if (value === null || typeof value !== 'object') return JSON.stringify(value ?? null);
  if (Array.isArray(value)) return `[${value.map((v) => stableSettingsJson(v)).join(',')}]`;
  const entries = Object.entries(value as Record<string, unknown>)
    .filter(([, v]) => v !== undefined)
    .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
  return `{${entries.map(([k, v]) => `${JSON.stringify(k)}:${stableSettingsJson(v)}`).join(',')}}`;
}
