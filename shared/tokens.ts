/** Personal API tokens for scripts and pipelines (`Authorization: Bearer <token>`). */
import { z } from 'zod';

export const apiTokenSchema = z.object({
  id: z.number().int(),
  name: z.string(),
  /** The first characters of the token, to tell tokens apart; the rest is never shown again. */
  prefix: z.string(),
  createdAt: z.string(),
  lastUsedAt: z.string().nullable(),
});
export type ApiToken = z.infer<typeof apiTokenSchema>;

export const apiTokenListSchema = z.array(apiTokenSchema);

export const createTokenRequestSchema = z.object({
  name: z
    .string()
    .trim()
    .min(1, { error: 'Give the token a name.' })
    .max(100, { error: 'Token names are at most 100 characters long.' }),
});
export type CreateTokenRequest = z.infer<typeof createTokenRequestSchema>;

/** POST /api/tokens answer: the plaintext token is in `token`, shown this once only. */
export const createdTokenSchema = apiTokenSchema.extend({ token: z.string() });
export type CreatedToken = z.infer<typeof createdTokenSchema>;

export const tokenIdParamsSchema = z.object({ id: z.coerce.number().int().positive() });
