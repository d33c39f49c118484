/**
 * The source-catalogue contract shared by the engine, the service, the exports and the client.
 * Positions follow the FITS convention: pixel (1, 1) is the centre of the first pixel.
 */
import { z } from 'zod';

/** Per-source quality flags (Skysieve's own vocabulary). */
export const sourceFlagSchema = z.enum([
  /** The source's fitting footprint touches the image edge. */
  'edge',
  /** The footprint touches masked (blank) pixels. */
  'near-mask',
  /** The source was split from a blend with a neighbour. */
  'blended',
]);
export type SourceFlag = z.infer<typeof sourceFlagSchema>;

export const catalogueSourceSchema = z.object({
  /** 1-based running number, brightest first. */
  id: z.number().int().positive(),
  /** Position in FITS 1-based pixel coordinates of the image it was measured on. */
  x: z.number(),
  y: z.number(),
  /** 1σ position errors in pixels. */
  xErr: z.number().nonnegative(),
  yErr: z.number().nonnegative(),
  /** World position in degrees when the image has a celestial WCS, else null. */
  ra: z.number().nullable(),
  dec: z.number().nullable(),
  /** 1σ errors on RA·cos(Dec) and Dec in arcsec, null without a celestial WCS. */
  raErrArcsec: z.number().nonnegative().nullable(),
  decErrArcsec: z.number().nonnegative().nullable(),
  /** Total flux: the source's summed contribution in image units × pixels (PSF normalised to unit sum). */
  flux: z.number(),
  fluxErr: z.number().nonnegative(),
  /** flux / beam area in pixels, for per-beam units (e.g. Jy/beam → Jy); null otherwise. */
  fluxDensity: z.number().nullable(),
  fluxDensityErr: z.number().nonnegative().nullable(),
  /** flux / fluxErr. */
  snr: z.number(),
  /** Counts images only: detection significance against the background alone (Gaussian-equivalent σ). */
  significance: z.number().nullable(),
  flags: z.array(sourceFlagSchema),
});
export type CatalogueSource = z.infer<typeof catalogueSourceSchema>;
