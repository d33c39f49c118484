/**
 * The one error shape of the API: `{ error: { code, message, details? } }`.
 * `code` is machine-readable and stable; `message` is written for a person and may be shown as is.
 */
import { z } from 'zod';

export const errorCodeSchema = z.enum([
  /** 400: the input failed validation; `details` lists the problems per field. */
  'validation_failed',
  /** 400: the request is well-formed but cannot be done as asked (expired link, wrong confirmation …). */
  'bad_request',
  /** 401: not signed in, or the session / token is no longer valid. */
  'unauthenticated',
  /** 401: sign-in with a wrong e-mail or password. */
  'wrong_credentials',
  /** 403: signed in but not allowed (not an admin, account disabled, registration closed …). */
  'forbidden',
  /** 403: the CSRF token header is missing or does not match the session. */
  'csrf_invalid',
  /** 404: no such object, or one the caller cannot see. */
  'not_found',
  /** 409: the change conflicts with existing data (duplicate e-mail, last owner …). */
  'conflict',
  /** 413: the upload or body is larger than allowed. */
  'payload_too_large',
  /** 422: the content was read but cannot be used (e.g. an image that is not valid FITS). */
  'unprocessable',
  /** 429: too many attempts; try again later. */
  'rate_limited',
  /** 500: something went wrong on the server; the message is generic on purpose. */
  'internal',
]);
export type ErrorCode = z.infer<typeof errorCodeSchema>;

/** The HTTP status each code is sent with. */
export const statusForErrorCode: Record<ErrorCode, number> = {
  validation_failed: 400,
  bad_request: 400,
  unauthenticated: 401,
  wrong_credentials: 401,
  forbidden: 403,
  csrf_invalid: 403,
  not_found: 404,
  conflict: 409,
  payload_too_large: 413,
  unprocessable: 422,
  rate_limited: 429,
  internal: 500,
};

/** One validation problem: where it is (`path`, e.g. `["email"]`) and what is wrong. */
export const fieldIssueSchema = z.object({
  path: z.array(z.union([z.string(), z.number()])),
  message: z.string(),
});
export type FieldIssue = z.infer<typeof fieldIssueSchema>;

export const errorBodySchema = z.object({
  error: z.object({
    code: errorCodeSchema,
    message: z.string(),
    /** For `validation_failed`: `{ issues: FieldIssue[] }`; other codes may carry their own small object. */
    details: z.unknown().optional(),
  }),
});
export type ErrorBody = z.infer<typeof errorBodySchema>;
