/**
 * The one error middleware. Known app errors keep their status and message; Objection and PostgreSQL
 * errors are translated (validation → 400, not found → 404, unique / foreign key → 409); anything else
 * is a 500 with a generic message (the details go to the server log, never to the client).
 */
import type { ErrorRequestHandler, RequestHandler } from 'express';
import {
  CheckViolationError,
  DBError,
  ForeignKeyViolationError,
  NotFoundError,
  NotNullViolationError,
  UniqueViolationError,
  ValidationError,
} from 'objection';

import type { ErrorBody, ErrorCode } from '../../shared/errors';
import { statusForErrorCode } from '../../shared/errors';
import { AppError } from './app-error';

export type ErrorLogger = (error: unknown) => void;

function body(code: ErrorCode, message: string, details?: unknown): ErrorBody {
  return details === undefined ? { error: { code, message } } : { error: { code, message, details } };
}

/** Maps any thrown value to [status, body]. Exported for tests. */
export function describeError(error: unknown): { status: number; body: ErrorBody; unexpected: boolean } {
  const make = (code: ErrorCode, message: string, details?: unknown, unexpected = false) => ({
    status: statusForErrorCode[code],
    body: body(code, message, details),
    unexpected,
  });
  if (error instanceof AppError) return make(error.code, error.message, error.details);
  if (error instanceof ValidationError) {
    return make('validation_failed', 'The data is not valid.', { issues: validationIssues(error) });
  }
  if (error instanceof NotFoundError) return make('not_found', 'Not found.');
  if (error instanceof UniqueViolationError) {
    return make('conflict', 'That already exists.', { columns: error.columns });
  }
  if (error instanceof ForeignKeyViolationError) {
    return make('conflict', 'That refers to something that does not exist (or is still in use).');
  }
  if (error instanceof NotNullViolationError || error instanceof CheckViolationError) {
    return make('validation_failed', 'The data is not valid.');
  }
  if (error instanceof DBError)
    return make('internal', 'Something went wrong on the server.', undefined, true);
  // body-parser errors carry a `type` and a status.
  if (typeof error === 'object' && error !== null && 'type' in error) {
    const type = (error as { type: unknown }).type;
    if (type === 'entity.too.large') return make('payload_too_large', 'The request body is too large.');
    if (type === 'entity.parse.failed')
      return make('validation_failed', 'The request body is not valid JSON.');
    if (type === 'charset.unsupported' || type === 'encoding.unsupported') {
      return make('validation_failed', 'The request body encoding is not supported.');
    }
  }
  return make('internal', 'Something went wrong on the server.', undefined, true);
}

function validationIssues(error: ValidationError): { path: string[]; message: string }[] {
  const data = (error.data ?? {}) as Record<string, { message?: string }[]>;
  return Object.entries(data).flatMap(([field, problems]) =>
    (Array.isArray(problems) ? problems : []).map((problem) => ({
      path: [field],
      message: problem.message ?? 'is not valid',
    })),
  );
}

export function errorHandler(log: ErrorLogger): ErrorRequestHandler {
  return (error, _req, res, next) => {
    if (res.headersSent) {
      next(error);
      return;
    }
    const described = describeError(error);
    if (described.unexpected) log(error);
    res.status(described.status).json(described.body);
  };
}

/** Unknown /api paths: JSON 404 instead of the SPA page. */
export const apiNotFound: RequestHandler = (req, res) => {
  res.status(404).json(body('not_found', `No API route ${req.method} ${req.originalUrl.split('?')[0]}.`));
};
