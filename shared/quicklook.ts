/**
 * GET /api/runs/:id/quicklook.png: a quick-look picture of one plane of a finished run with its catalogue's
 * sources marked (server/runs/quicklook-image.ts draws it). Shared by the server and the client.
 */
import { z } from 'zod';

import { componentNameSchema } from './runs';

/** The input image ('data') or one of the run's components. */
export const quicklookPlaneSchema = z.union([z.literal('data'), componentNameSchema], {
  error: `Choose the plane to show: data or one of ${componentNameSchema.options.join(', ')}.`,
});
export type QuicklookPlane = z.infer<typeof quicklookPlaneSchema>;

/** The viewer's sequential maps and its diverging one (seesaw). */
export const QUICKLOOK_COLOUR_MAPS = ['grey', 'ember', 'tidepool', 'heather', 'frost', 'seesaw'] as const;

/** Planes of signed values centred on zero: drawn with limits symmetric about zero, linearly, in seesaw. */
export const SIGNED_QUICKLOOK_PLANES: readonly QuicklookPlane[] = ['residual', 'residualNorm'];

export const quicklookQuerySchema = z.object({
  component: quicklookPlaneSchema.default('data'),
  /** Longest side of the picture in pixels. */
  maxSize: z.coerce
    .number({ error: 'maxSize must be a number of pixels.' })
    .int({ error: 'maxSize must be a whole number of pixels.' })
    .min(64, { error: 'maxSize must be at least 64 pixels.' })
    .max(4096, { error: 'maxSize must be at most 4096 pixels.' })
    .default(1024),
  /** Default: seesaw for the signed planes, ember for the others. */
  colourMap: z.enum(QUICKLOOK_COLOUR_MAPS).optional(),
});
export type QuicklookQuery = z.output<typeof quicklookQuerySchema>;
