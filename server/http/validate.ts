/**
 * zod validation of request parts. The parsed (trimmed, coerced, defaulted) value replaces the raw one,
 * so controllers read `req.body`, `req.params`, `req.query` already typed and clean.
 */
import type { RequestHandler } from 'express';
import type { ZodType, z } from 'zod';

import type { FieldIssue } from '../../shared/errors';
import { AppError } from './app-error';

export interface RequestSchemas {
  body?: ZodType;
  params?: ZodType;
  query?: ZodType;
}

const partNames = { body: 'request body', params: 'address', query: 'query string' } as const;

export function toFieldIssues(error: z.ZodError): FieldIssue[] {
  return error.issues.map((issue) => ({
    path: issue.path.map((part) => (typeof part === 'symbol' ? String(part) : part)),
    message: issue.message,
  }));
}

/** One-line summary of the first problem, e.g. "email: Enter a valid e-mail address." */
function summary(part: keyof typeof partNames, issues: FieldIssue[]): string {
  const first = issues[0];
  if (!first) return `The ${partNames[part]} is not valid.`;
  const where = first.path.length > 0 ? `${first.path.join('.')}: ` : '';
  return `${where}${first.message}`;
}

export function validate(schemas: RequestSchemas): RequestHandler {
  return (req, _res, next) => {
    for (const part of ['params', 'query', 'body'] as const) {
      const schema = schemas[part];
      if (!schema) continue;
      const raw: unknown = part === 'body' ? (req.body ?? {}) : req[part];
      const result = schema.safeParse(raw);
      if (!result.success) {
        const issues = toFieldIssues(result.error);
        next(new AppError('validation_failed', summary(part, issues), { issues }));
        return;
      }
      // Express 5 defines req.query as a getter; redefine it on this request.
      Object.defineProperty(req, part, {
        value: result.data,
        writable: true,
        configurable: true,
        enumerable: true,
      });
    }
    next();
  };
}
