/**
 * Images of a project and storage usage: bodies of /api/projects/:id/images, /api/images/* and /api/admin/storage,
 * plus the binary pixel view the viewer reads (GET /api/images/:id/pixels).
 */
import { z } from 'zod';

export const imageFormatSchema = z.enum(['fits', 'tiff', 'png', 'jpeg']);
export type ImageFormatName = z.infer<typeof imageFormatSchema>;

export const imageNameSchema = z
  .string()
  .trim()
  .min(1, { error: 'Enter an image name.' })
  .max(200, { error: 'Image names are at most 200 characters long.' });

/** Celestial or linear WCS of axes 1 and 2, summarised for people (the header cards carry the full truth). */
export const wcsSummarySchema = z.object({
  celestial: z.boolean(),
  /** Projection code (TAN, SIN, …) of a celestial WCS; null for a linear one. */
  projection: z.string().nullable(),
  /** Sky frame (ICRS, FK5, galactic, …); null for a linear WCS. */
  frame: z.string().nullable(),
  equinox: z.number().nullable(),
  ctype: z.tuple([z.string(), z.string()]),
  /** CRPIX1, CRPIX2 (FITS 1-based pixels). */
  referencePixel: z.tuple([z.number(), z.number()]),
  /** CRVAL1, CRVAL2 (degrees on celestial axes). */
  referenceValue: z.tuple([z.number(), z.number()]),
  /** Size of one pixel step along axes 1 and 2 in arcseconds (celestial) or world units per pixel (linear). */
  pixelScaleArcsec: z.tuple([z.number(), z.number()]),
  /** −1: the sky's usual parity (east left with north up, CDELT1 < 0); +1: mirrored. */
  cdelt1Sign: z.union([z.literal(-1), z.literal(1)]),
  /** World coordinates (degrees) of the image centre; null when the projection has no solution there. */
  centre: z.object({ lon: z.number(), lat: z.number() }).nullable(),
});
export type WcsSummary = z.infer<typeof wcsSummarySchema>;

/** Restoring beam from BMAJ/BMIN/BPA. */
export const beamSummarySchema = z.object({
  majorArcsec: z.number(),
  minorArcsec: z.number(),
  /** Position angle of the major axis, degrees, north through east. */
  paDeg: z.number(),
  /** Gaussian beam solid angle π θmaj θmin / (4 ln 2) in pixels; null without a celestial pixel scale. */
  areaPixels: z.number().nullable(),
});
export type BeamSummary = z.infer<typeof beamSummarySchema>;

/** Statistics of the valid pixels (blank = BLANK, NaN or ±Infinity in the file). */
export const pixelStatisticsSchema = z.object({
  min: z.number(),
  max: z.number(),
  mean: z.number(),
  median: z.number(),
  /** Standard deviation of the valid pixels (signal and noise together). */
  standardDeviation: z.number(),
  validPixels: z.number().int().nonnegative(),
  blankPixels: z.number().int().nonnegative(),
});
export type PixelStatistics = z.infer<typeof pixelStatisticsSchema>;

/** White-noise σ from the MAD of the discrete Laplacian (engine/noise/robust-sigma.ts), in image units. */
export const noiseEstimateSchema = z.object({
  sigma: z.number(),
  /** Number of pixel values the estimate used. */
  samples: z.number().int().nonnegative(),
  /** Approximate 1σ uncertainty of σ itself: 1.65 σ / √(2 n) for a MAD-based σ of normal noise (common practice). */
  sigmaUncertainty: z.number(),
});
export type NoiseEstimate = z.infer<typeof noiseEstimateSchema>;

export const imageSummarySchema = z.object({
  id: z.number().int(),
  projectId: z.number().int(),
  name: z.string(),
  originalFileName: z.string(),
  format: imageFormatSchema,
  /** Whether the uploaded file was gzip-compressed. */
  gzipped: z.boolean(),
  width: z.number().int().positive(),
  height: z.number().int().positive(),
  /** 1-based plane read from a cube; null for a single-plane image. */
  plane: z.number().int().nullable(),
  /** BUNIT; null when the file does not say. */
  unit: z.string().nullable(),
  /** Size of the original file in bytes: what counts against the uploader's quota. */
  fileBytes: z.number().int().nonnegative(),
  contentSha256: z.string().regex(/^[0-9a-f]{64}$/),
  statistics: pixelStatisticsSchema,
  noise: noiseEstimateSchema.nullable(),
  wcs: wcsSummarySchema.nullable(),
  beam: beamSummarySchema.nullable(),
  /** Things the reader worked around (e.g. an unsupported projection). */
  warnings: z.array(z.string()),
  uploadedBy: z.object({ id: z.number().int(), displayName: z.string() }).nullable(),
  createdAt: z.string(),
  updatedAt: z.string(),
});
export type ImageSummary = z.infer<typeof imageSummarySchema>;
export const imageListSchema = z.array(imageSummarySchema);

export const headerCardSchema = z.object({
  keyword: z.string(),
  value: z.union([z.string(), z.number(), z.boolean(), z.null()]).optional(),
  comment: z.string().optional(),
  real: z.boolean().optional(),
});
export type HeaderCardDto = z.infer<typeof headerCardSchema>;

export const imageDetailSchema = imageSummarySchema.extend({
  header: z.array(headerCardSchema),
  /** NAXIS1, NAXIS2, … as in the file. */
  originalAxes: z.array(z.number().int()),
});
export type ImageDetail = z.infer<typeof imageDetailSchema>;

export const imageIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });

export const renameImageRequestSchema = z.object({ name: imageNameSchema }).strict();
export type RenameImageRequest = z.infer<typeof renameImageRequestSchema>;

/** Optional text fields of the multipart upload beside `file`. */
export const uploadImageFieldsSchema = z.object({
  name: imageNameSchema.optional(),
  /** 1-based plane of a FITS cube. */
  plane: z.coerce.number().int().positive().optional(),
});

export const PIXEL_VIEW_MIN_SIZE = 16;
export const PIXEL_VIEW_MAX_SIZE = 4096;
export const pixelViewQuerySchema = z.object({
  /** Longest side of the view in pixels; the image is block-averaged by the smallest integer factor that fits. */
  maxSize: z.coerce
    .number()
    .int({ error: 'maxSize must be a whole number of pixels.' })
    .min(PIXEL_VIEW_MIN_SIZE, { error: `maxSize must be at least ${PIXEL_VIEW_MIN_SIZE}.` })
    .max(PIXEL_VIEW_MAX_SIZE, { error: `maxSize must be at most ${PIXEL_VIEW_MAX_SIZE}.` })
    .default(1024),
});

/**
 * Binary pixel view (`application/octet-stream`), all little-endian:
 *
 * | offset | type    | field                                                              |
 * | ------ | ------- | ------------------------------------------------------------------ |
 * | 0      | 4 bytes | magic "SKPV"                                                       |
 * | 4      | uint32  | format version (1)                                                 |
 * | 8      | uint32  | width of the view                                                  |
 * | 12     | uint32  | height of the view                                                 |
 * | 16     | uint32  | block factor f (each view pixel averages up to f × f image pixels) |
 * | 20     | uint32  | width of the full image                                            |
 * | 24     | uint32  | height of the full image                                           |
 * | 28     | uint32  | number of blank view pixels (NaN)                                  |
 * | 32     | float32 × width × height: row-major, x fastest, row 0 = the bottom row (FITS y = 1)  |
 *
 * A view pixel (i, j) covers image pixels x ∈ [i·f, (i+1)·f), y ∈ [j·f, (j+1)·f) (0-based, clipped at the edge) and
 * holds the mean of the valid ones, or NaN when all are blank.
 */
export const PIXEL_VIEW_MAGIC = 'SKPV';
export const PIXEL_VIEW_VERSION = 1;
export const PIXEL_VIEW_HEADER_BYTES = 32;

export interface PixelView {
  width: number;
  height: number;
  factor: number;
  sourceWidth: number;
  sourceHeight: number;
  blankPixels: number;
  /** Row-major, row 0 = bottom; NaN = blank. */
  data: Float32Array;
}

/** Encodes a view in the format above. */
export function encodePixelView(view: PixelView): Uint8Array {
  const bytes = new Uint8Array(PIXEL_VIEW_HEADER_BYTES + view.data.length * 4);
  const header = new DataView(bytes.buffer);
  for (let i = 0; i < 4; i++) header.setUint8(i, PIXEL_VIEW_MAGIC.charCodeAt(i));
  const fields = [
    PIXEL_VIEW_VERSION,
    view.width,
    view.height,
    view.factor,
    view.sourceWidth,
    view.sourceHeight,
  ];
  fields.push(view.blankPixels);
  fields.forEach((value, k) => header.setUint32(4 + 4 * k, value, true));
  for (let i = 0; i < view.data.length; i++)
    header.setFloat32(PIXEL_VIEW_HEADER_BYTES + 4 * i, view.data[i]!, true);
  return bytes;
}

/** Decodes a view; throws with a short message when the bytes are not one. */
export function decodePixelView(bytes: Uint8Array): PixelView {
  if (bytes.length < PIXEL_VIEW_HEADER_BYTES) throw new Error('Pixel view: shorter than its header.');
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const magic = String.fromCharCode(...bytes.subarray(0, 4));
  if (magic !== PIXEL_VIEW_MAGIC)
    throw new Error(`Pixel view: magic is "${magic}", expected "${PIXEL_VIEW_MAGIC}".`);
  const field = (k: number) => view.getUint32(4 + 4 * k, true);
  if (field(0) !== PIXEL_VIEW_VERSION) throw new Error(`Pixel view: version ${field(0)} is not supported.`);
  const width = field(1);
  const height = field(2);
  if (bytes.length !== PIXEL_VIEW_HEADER_BYTES + width * height * 4) {
    throw new Error(`Pixel view: ${bytes.length} bytes do not match ${width}×${height} pixels.`);
  }
  const data = new Float32Array(width * height);
  for (let i = 0; i < data.length; i++) data[i] = view.getFloat32(PIXEL_VIEW_HEADER_BYTES + 4 * i, true);
  return {
    width,
    height,
    factor: field(3),
    sourceWidth: field(4),
    sourceHeight: field(5),
    blankPixels: field(6),
    data,
  };
}

/** Storage used by one account, for GET /api/admin/storage. */
export const userStorageSchema = z.object({
  userId: z.number().int(),
  email: z.string(),
  displayName: z.string(),
  quotaBytes: z.number().int().nonnegative(),
  /** The quota counter (originals and run results charged to the account). */
  bytesUsed: z.number().int().nonnegative(),
  imageCount: z.number().int().nonnegative(),
  /** Bytes of the account's uploaded originals (part of bytesUsed). */
  imageBytes: z.number().int().nonnegative(),
});
export type UserStorage = z.infer<typeof userStorageSchema>;

export const projectStorageSchema = z.object({
  projectId: z.number().int(),
  name: z.string(),
  /** The project's owner; null when that account was deleted. */
  ownerId: z.number().int().nullable(),
  ownerEmail: z.string().nullable(),
  ownerName: z.string().nullable(),
  imageCount: z.number().int().nonnegative(),
  /** Bytes of the originals uploaded into the project. */
  imageBytes: z.number().int().nonnegative(),
  runCount: z.number().int().nonnegative(),
  /** Bytes of the stored run results (component planes) of the project's runs. */
  runBytes: z.number().int().nonnegative(),
});
export type ProjectStorage = z.infer<typeof projectStorageSchema>;

export const storageUsageSchema = z.object({
  users: z.array(userStorageSchema),
  projects: z.array(projectStorageSchema),
  totals: z.object({ bytesUsed: z.number().int().nonnegative(), quotaBytes: z.number().int().nonnegative() }),
});
export type StorageUsage = z.infer<typeof storageUsageSchema>;
