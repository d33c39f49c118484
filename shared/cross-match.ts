/**
 * The reference-catalogue and cross-match contract: uploading a reference catalogue (CSV or VOTable) into a
 * project, previewing how its columns would be read, and matching a run's catalogue against a reference or
 * against another run. Shared by the server and the client; no Node imports.
 *
 * Positions: RA/Dec in degrees, or FITS 1-based pixel positions x/y on the run's image. Offsets are ours − theirs:
 * ΔRA·cos δ and ΔDec in arcsec on the sky, Δx and Δy in pixels by pixel position.
 */
import { z } from 'zod';

/** Largest reference catalogue file accepted (the image upload limit applies too, if lower). */
export const REFERENCE_CATALOGUE_MAX_BYTES = 32 * 1024 * 1024;

export const referenceFormatSchema = z.enum(['csv', 'votable']);
export type ReferenceFormatName = z.infer<typeof referenceFormatSchema>;

export const referencePositionsSchema = z.enum(['sky', 'pixel']);
export type ReferencePositions = z.infer<typeof referencePositionsSchema>;

/** The quantities a column can be chosen for. */
export const MAPPING_FIELDS = ['ra', 'dec', 'x', 'y', 'flux', 'id'] as const;
export type MappingField = (typeof MAPPING_FIELDS)[number];

const columnName = z.string().trim().min(1).max(200);

/** Which file column holds which quantity; fields left out are guessed. */
export const columnMappingSchema = z
  .object({
    ra: columnName.optional(),
    dec: columnName.optional(),
    x: columnName.optional(),
    y: columnName.optional(),
    flux: columnName.optional(),
    id: columnName.optional(),
  })
  .strict();
export type ColumnMappingInput = z.infer<typeof columnMappingSchema>;

/** A mapping sent as JSON text (a multipart field or a query parameter). */
const mappingText = z
  .string()
  .max(4000)
  .transform((text, context) => {
    if (text.trim() === '') return undefined;
    let value: unknown;
    try {
      value = JSON.parse(text);
    } catch {
      context.addIssue({
        code: 'custom',
        message: 'mapping must be JSON, e.g. {"ra":"RAJ2000","dec":"DEJ2000"}',
      });
      return z.NEVER;
    }
    const parsed = columnMappingSchema.safeParse(value);
    if (!parsed.success) {
      context.addIssue({
        code: 'custom',
        message: `mapping may name only ${MAPPING_FIELDS.join(', ')}, each as a column name`,
      });
      return z.NEVER;
    }
    return parsed.data;
  });

/**
 * Options of a preview or an upload: multipart text fields beside `file`, or query parameters when the file is
 * sent as the raw request body (Content-Type text/csv, text/plain, application/xml or application/x-votable+xml).
 */
export const referenceReadOptionsSchema = z.object({
  /** A name for the catalogue in the project; the file name without its extension when omitted. */
  name: z.string().trim().min(1).max(200).optional(),
  /** The file's original name (raw bodies have none). */
  fileName: z.string().trim().min(1).max(1000).optional(),
  /** Detected from the content when omitted ('<' first → VOTable). */
  format: referenceFormatSchema.optional(),
  /** Read pixel x/y instead of RA/Dec when a file has both. */
  positions: referencePositionsSchema.optional(),
  mapping: mappingText.optional(),
});
export type ReferenceReadOptions = z.output<typeof referenceReadOptionsSchema>;

export const referenceColumnSchema = z.object({
  name: z.string(),
  unit: z.string().nullable(),
  ucd: z.string().nullable(),
});
export type ReferenceColumnDto = z.infer<typeof referenceColumnSchema>;

export const rejectedRowSchema = z.object({
  /** 1-based data row (header not counted). */
  row: z.number().int(),
  /** CSV only: the file line the row ends on. */
  line: z.number().int().nullable(),
  reason: z.string(),
});
export type RejectedRowDto = z.infer<typeof rejectedRowSchema>;

export const referenceEntrySchema = z.object({
  row: z.number().int(),
  id: z.string().nullable(),
  ra: z.number().nullable(),
  dec: z.number().nullable(),
  x: z.number().nullable(),
  y: z.number().nullable(),
  flux: z.number().nullable(),
});
export type ReferenceEntryDto = z.infer<typeof referenceEntrySchema>;

export const storedMappingSchema = z.object({
  ra: z.string().optional(),
  dec: z.string().optional(),
  x: z.string().optional(),
  y: z.string().optional(),
  flux: z.string().optional(),
  id: z.string().optional(),
});

/** What POST …/reference-catalogues/preview answers: how the file would be read; nothing is stored. */
export const referencePreviewSchema = z.object({
  fileName: z.string().nullable(),
  format: referenceFormatSchema,
  fileBytes: z.number().int(),
  columns: z.array(referenceColumnSchema),
  /** The first rows as text cells, in column order (null = empty cell). */
  sampleRows: z.array(z.array(z.string().nullable())),
  /** What Skysieve would pick on its own. */
  guessedMapping: storedMappingSchema,
  /** The mapping an upload with these options would use; null when the file cannot be read with it. */
  mapping: storedMappingSchema.nullable(),
  positions: referencePositionsSchema.nullable(),
  /** Why the file cannot be read with these options (e.g. no position columns); null when it can. */
  problem: z.string().nullable(),
  /** Things to check before uploading (no flux column, positions recognised by name only, …). */
  notes: z.array(z.string()),
  /** True when a person should look at the mapping (a problem, or a guess from names alone). */
  unsure: z.boolean(),
  rowsRead: z.number().int(),
  rowsRejected: z.number().int(),
  rejected: z.array(rejectedRowSchema),
  /** The first rows as they would be stored. */
  sampleEntries: z.array(referenceEntrySchema),
});
export type ReferencePreview = z.infer<typeof referencePreviewSchema>;

export const referenceCatalogueSummarySchema = z.object({
  id: z.number().int(),
  projectId: z.number().int(),
  name: z.string(),
  originalFileName: z.string(),
  format: referenceFormatSchema,
  positions: referencePositionsSchema,
  mapping: storedMappingSchema,
  columns: z.array(referenceColumnSchema),
  rowsRead: z.number().int(),
  rowsRejected: z.number().int(),
  /** Entries kept (rowsRead − rowsRejected). */
  entryCount: z.number().int(),
  /** Bytes charged to the quota (the file plus its stored entries). */
  bytes: z.number().int(),
  uploadedBy: z.object({ id: z.number().int(), displayName: z.string() }).nullable(),
  createdAt: z.string(),
});
export type ReferenceCatalogueSummary = z.infer<typeof referenceCatalogueSummarySchema>;

export const referenceCatalogueDetailSchema = referenceCatalogueSummarySchema.extend({
  /** The rows left out, with reasons (at most 200 listed; rowsRejected is the exact count). */
  rejected: z.array(rejectedRowSchema),
  /** The first stored entries. */
  sampleEntries: z.array(referenceEntrySchema),
});
export type ReferenceCatalogueDetail = z.infer<typeof referenceCatalogueDetailSchema>;

export const referenceCatalogueListSchema = z.object({
  referenceCatalogues: z.array(referenceCatalogueSummarySchema),
});

export const referenceCatalogueParamsSchema = z.object({
  id: z.coerce.number().int().positive(),
  catalogueId: z.coerce.number().int().positive(),
});

// ---- cross-match ----

export const crossMatchTargetSchema = z.discriminatedUnion('kind', [
  z.object({ kind: z.literal('reference'), id: z.number().int().positive() }),
  z.object({ kind: z.literal('run'), id: z.number().int().positive() }),
]);
export type CrossMatchTarget = z.infer<typeof crossMatchTargetSchema>;

const radiusArcsec = z
  .number()
  .finite()
  .positive('The match radius must be positive.')
  .max(3600, 'A match radius above 3600 arcsec (1°) is not a cross-match.');
const radiusPixels = z
  .number()
  .finite()
  .positive('The match radius must be positive.')
  .max(1000, 'A match radius above 1000 pixels is not a cross-match.');

export const crossMatchRequestSchema = z
  .object({
    against: crossMatchTargetSchema,
    /** Sky match radius; default half the geometric-mean beam FWHM. */
    radiusArcsec: radiusArcsec.optional(),
    /** Pixel match radius (matching by pixel position); default half the geometric-mean PSF FWHM in pixels. */
    radiusPixels: radiusPixels.optional(),
  })
  .strict();
export type CrossMatchRequest = z.infer<typeof crossMatchRequestSchema>;

/** The same request as a query string, for the downloads (GET …/cross-match?kind=…&against=…&format=…). */
export const crossMatchExportQuerySchema = z.object({
  kind: z.enum(['reference', 'run']),
  against: z.coerce.number().int().positive(),
  radiusArcsec: z.coerce.number().pipe(radiusArcsec).optional(),
  radiusPixels: z.coerce.number().pipe(radiusPixels).optional(),
  format: z.enum(['csv', 'votable', 'fits']).default('csv'),
});
export type CrossMatchExportQuery = z.output<typeof crossMatchExportQuerySchema>;

const nullableNumber = z.number().nullable();

export const matchedPairSchema = z.object({
  ourId: z.number().int(),
  /** Their id (reference id column or `row N`; a run's source id as text). */
  theirId: z.string(),
  /** arcsec on the sky, pixels by pixel position. */
  separation: z.number(),
  /** ours − theirs: ΔRA·cos δ (arcsec) or Δx (pixels). */
  offset1: z.number(),
  /** ours − theirs: ΔDec (arcsec) or Δy (pixels). */
  offset2: z.number(),
  fluxRatio: nullableNumber,
  ourFlux: nullableNumber,
  theirFlux: nullableNumber,
  /** Our position: FITS pixels on the run's image, and RA/Dec when known. */
  ourX: z.number(),
  ourY: z.number(),
  ourRa: nullableNumber,
  ourDec: nullableNumber,
  /** Their position on the run's image (through its WCS for RA/Dec entries; null outside the projection). */
  theirX: nullableNumber,
  theirY: nullableNumber,
  theirRa: nullableNumber,
  theirDec: nullableNumber,
});
export type MatchedPairDto = z.infer<typeof matchedPairSchema>;

export const unmatchedEntrySchema = z.object({
  id: z.string(),
  x: nullableNumber,
  y: nullableNumber,
  ra: nullableNumber,
  dec: nullableNumber,
  flux: nullableNumber,
});
export type UnmatchedEntry = z.infer<typeof unmatchedEntrySchema>;

export const crossMatchResultSchema = z.object({
  runId: z.number().int(),
  against: z.object({ kind: z.enum(['reference', 'run']), id: z.number().int(), name: z.string() }),
  mode: z.enum(['sky', 'pixel']),
  unit: z.enum(['arcsec', 'pixel']),
  radius: z.number(),
  /** Where the radius came from: given, the image's restoring beam, or the run's PSF. */
  radiusSource: z.enum(['given', 'beam', 'psf']),
  /** Which of our flux columns was compared: flux density (per-beam images) or total flux. */
  ourFluxQuantity: z.enum(['fluxDensity', 'flux']),
  ourFluxUnit: z.string(),
  counts: z.object({
    ours: z.number().int(),
    theirs: z.number().int(),
    matched: z.number().int(),
    onlyOurs: z.number().int(),
    onlyTheirs: z.number().int(),
  }),
  offsets: z.object({
    count: z.number().int(),
    mean1: nullableNumber,
    mean1Err: nullableNumber,
    mean2: nullableNumber,
    mean2Err: nullableNumber,
    rms1: nullableNumber,
    rms2: nullableNumber,
    rmsSeparation: nullableNumber,
  }),
  fluxRatio: z.object({
    count: z.number().int(),
    median: nullableNumber,
    medianErr: nullableNumber,
    robustScatter: nullableNumber,
  }),
  /**
   * Pairs expected by chance alone: our count × their surface density over the image × π r² (a Poisson estimate
   * for unclustered sources); null when the image area on the sky is unknown.
   */
  chanceMatchesExpected: nullableNumber,
  pairs: z.array(matchedPairSchema),
  onlyOurs: z.array(unmatchedEntrySchema),
  onlyTheirs: z.array(unmatchedEntrySchema),
  cautions: z.array(z.string()),
});
export type CrossMatchResultDto = z.infer<typeof crossMatchResultSchema>;
