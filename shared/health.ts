/** Health and public configuration: readable without signing in. */
import { z } from 'zod';

export const healthSchema = z.object({
  status: z.literal('ok'),
  /** The app version (package.json). */
  version: z.string(),
  /** Whether the server could reach PostgreSQL just now. */
  database: z.enum(['ok', 'down']),
});
export type Health = z.infer<typeof healthSchema>;

export const publicConfigSchema = z.object({
  /** Anyone may create an account (otherwise only with an invitation). */
  registrationOpen: z.boolean(),
  version: z.string(),
  /** E-mail goes to the built-in development inbox (admins read it under Admin → Mail). */
  devMail: z.boolean(),
  /** Minimum password length the server enforces. */
  passwordMinLength: z.number().int().positive(),
});
export type PublicConfig = z.infer<typeof publicConfigSchema>;
