/** Errors with a status and a message meant for a person; the error middleware turns them into the one JSON shape. */
import { type ErrorCode, statusForErrorCode } from '../../shared/errors';

export class AppError extends Error {
  readonly status: number;
  constructor(
    readonly code: ErrorCode,
    message: string,
    readonly details?: unknown,
  ) {
    super(message);
    this.name = 'AppError';
    this.status = statusForErrorCode[code];
  }
}

export const badRequest = (message: string, details?: unknown) =>
  new AppError('bad_request', message, details);
export const unauthenticated = (message = 'Sign in to continue.') => new AppError('unauthenticated', message);
export const forbidden = (message: string) => new AppError('forbidden', message);
export const notFound = (message: string) => new AppError('not_found', message);
export const conflict = (message: string, details?: unknown) => new AppError('conflict', message, details);
