/**
 * The joint-runs contract: one separation fitted to 2–4 images of one project together (one diffuse and one
 * compact field on a common sky grid, a flux-scale factor per image; server/engine/joint). The first image is
 * the reference: the catalogue is in its pixels, the scale factors are relative to it, and the run is listed
 * among its runs. Shared by the server and the client; no Node imports.
 */
import { z } from 'zod';

import { psfSettingSchema, separationSettingsInputSchema } from './separation-settings';

export const MIN_JOINT_IMAGES = 2;
export const MAX_JOINT_IMAGES = 4;

export const runKindSchema = z.enum(['single', 'joint']);
export type RunKind = z.infer<typeof runKindSchema>;

/** Overrides for one input image; anything left out comes from the run settings (image 1) or its header. */
export const jointImageOptionsSchema = z
  .object({
    likelihood: z.enum(['gaussian', 'poisson']).optional(),
    noiseSigma: z.number().positive().finite().optional().describe('Gaussian noise σ in this image’s unit.'),
    psf: psfSettingSchema.optional().describe('Gaussian PSF, FWHMs in this image’s own pixels.'),
    unit: z.string().trim().min(1).max(40).optional().describe('Replaces the BUNIT of this image.'),
  })
  .strict();
export type JointImageOptions = z.infer<typeof jointImageOptionsSchema>;

export const jointRunImageInputSchema = z
  .object({
    imageId: z.number().int().positive(),
    options: jointImageOptionsSchema.default({}),
  })
  .strict();

export const createJointRunRequestSchema = z
  .object({
    /** The reference first. */
    images: z
      .array(jointRunImageInputSchema)
      .min(MIN_JOINT_IMAGES, `A joint run needs at least ${MIN_JOINT_IMAGES} images`)
      .max(MAX_JOINT_IMAGES, `A joint run takes at most ${MAX_JOINT_IMAGES} images`)
      .refine((images) => new Set(images.map((i) => i.imageId)).size === images.length, {
        message: 'Each image may appear only once in a joint run',
      }),
    settings: separationSettingsInputSchema.default({ preset: 'balanced' }),
  })
  .strict();
export type CreateJointRunRequest = z.input<typeof createJointRunRequestSchema>;
export type CreateJointRunOutput = z.output<typeof createJointRunRequestSchema>;

/** One input image of a joint run, with what the fit found for it once it has succeeded. */
export const jointRunImageSchema = z.object({
  position: z.number().int().min(1).max(MAX_JOINT_IMAGES),
  imageId: z.number().int().nullable(),
  name: z.string(),
  width: z.number().int(),
  height: z.number().int(),
  options: jointImageOptionsSchema,
  /** Filled once the run has succeeded. */
  fit: z
    .object({
      /** Flux-scale factor c relative to the reference (the reference's is 1, fixed) and its 1σ error. */
      scale: z.object({ value: z.number(), error: z.number(), fixed: z.boolean(), mapValue: z.number() }),
      unit: z.string(),
      /** Values of this image per unit of the reference's (beam areas, pixel areas, prefixes). */
      unitGain: z.number(),
      likelihood: z.enum(['gaussian', 'poisson']),
      sigma: z.number().nullable(),
      sigmaSource: z.string().nullable(),
      psfFwhmPx: z.object({ major: z.number(), minor: z.number() }),
      beamAreaPx: z.number(),
      pixelsUsed: z.number().int(),
      pixelsOutside: z.number().int(),
      /** Provenance: the input as it was fitted. */
      inputName: z.string(),
      inputSha256: z.string(),
    })
    .nullable(),
});
export type JointRunImage = z.infer<typeof jointRunImageSchema>;

/** What the run row keeps of a finished joint fit (runs.joint_results). */
export const jointResultsSchema = z.object({
  grid: z.object({
    width: z.number().int(),
    height: z.number().int(),
    factor: z.number(),
    scaleArcsec: z.number(),
  }),
  scalePriorWidth: z.number(),
  refinement: z.enum(['reference-image', 'sharpest-image']),
  catalogueImage: z.number().int(),
  warnings: z.array(z.string()),
  images: z.array(jointRunImageSchema.shape.fit.unwrap()),
});
export type JointResults = z.infer<typeof jointResultsSchema>;

export const jointRunInfoSchema = z.object({
  images: z.array(jointRunImageSchema),
  grid: jointResultsSchema.shape.grid.nullable(),
  scalePriorWidth: z.number(),
  refinement: jointResultsSchema.shape.refinement.nullable(),
  warnings: z.array(z.string()),
});
export type JointRunInfo = z.infer<typeof jointRunInfoSchema>;

/** Planes stored for every input image (images 2…n have no common-grid sky fields of their own). */
export const jointImageComponentSchema = z.enum(['diffuse', 'compact', 'model', 'residual', 'residualNorm']);
export type JointImageComponent = z.infer<typeof jointImageComponentSchema>;
