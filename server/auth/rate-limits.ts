/** Rate limits on sign-in and password reset (in memory, per app instance; a single server process). */
import type { RequestHandler } from 'express';
import { rateLimit } from 'express-rate-limit';

import type { Config } from '../config';
import { AppError } from '../http/app-error';

function limiter(
  limit: number,
  windowMinutes: number,
  message: string,
  onlyFailures: boolean,
): RequestHandler {
  return rateLimit({
    windowMs: windowMinutes * 60_000,
    limit,
    standardHeaders: 'draft-8',
    legacyHeaders: false,
    skipSuccessfulRequests: onlyFailures,
    handler: (_req, _res, next) => next(new AppError('rate_limited', message)),
  });
}

export function createAuthRateLimits(config: Config): {
  signIn: RequestHandler;
  signUp: RequestHandler;
  reset: RequestHandler;
} {
  const minutes = config.rateLimitWindowMinutes;
  return {
    // Only failed attempts count: a team signing in from one office address is not locked out.
    signIn: limiter(
      config.signInRateLimit,
      minutes,
      `Too many failed sign-in attempts. Wait ${minutes} minutes and try again.`,
      true,
    ),
    signUp: limiter(
      config.signUpRateLimit,
      minutes,
      `Too many sign-ups from this address. Wait ${minutes} minutes and try again.`,
      false,
    ),
    reset: limiter(
      config.resetRateLimit,
      minutes,
      `Too many password reset attempts. Wait ${minutes} minutes and try again.`,
      false,
    ),
  };
}
