/**
 * Who is calling: an API token (`Authorization: Bearer …`, no session, no CSRF) or a session cookie
 * (express-session in PostgreSQL + passport-local, CSRF double-submit token tied to the session id).
 * Disabled accounts are dropped on every request, whichever way they come.
 */
import connectPgSimple from 'connect-pg-simple';
import { doubleCsrf } from 'csrf-csrf';
import type { Request, RequestHandler, Response } from 'express';
import session from 'express-session';
import { Passport } from 'passport';
import { Strategy as LocalStrategy } from 'passport-local';
import pg from 'pg';

import type { AppContext } from '../context';
import { AppError, unauthenticated } from '../http/app-error';
import { User } from '../models/user';
import { verifyCredentials } from './auth.service';
import { findUserByToken } from '../tokens/tokens.service';

export const sessionCookieName = 'skysieve.sid';
export const csrfCookieName = 'skysieve.csrf';
export const csrfHeaderName = 'x-csrf-token';

export const bearerToken = (req: Request): string | undefined => {
  const header = req.headers.authorization;
  if (!header) return undefined;
  const match = /^Bearer\s+(\S+)\s*$/i.exec(header);
  return match ? match[1] : '';
};

/** Parses the Cookie header into req.cookies (csrf-csrf reads it there). */
export const parseCookies: RequestHandler = (req, _res, next) => {
  const cookies: Record<string, string> = {};
  for (const pair of (req.headers.cookie ?? '').split(';')) {
    const equals = pair.indexOf('=');
    if (equals <= 0) continue;
    const name = pair.slice(0, equals).trim();
    const raw = pair
      .slice(equals + 1)
      .trim()
      .replace(/^"(.*)"$/, '$1');
    try {
      cookies[name] = decodeURIComponent(raw);
    } catch {
      cookies[name] = raw;
    }
  }
  req.cookies = cookies;
  next();
};

export const clientIp = (req: { ip?: string | undefined }): string | null => req.ip ?? null;

export interface Authentication {
  /** Everything to mount before the /api routes, in order. */
  middleware: RequestHandler[];
  /** CSRF check for cookie sessions; mounted per route after the access guard (so signed-out callers get 401). */
  checkCsrf: RequestHandler;
  passport: InstanceType<typeof Passport>;
  /** Issues (or reuses) the CSRF token of the caller's session. */
  issueCsrfToken(req: Request, res: Response): string;
  close(): Promise<void>;
}

export function createAuthentication(ctx: AppContext): Authentication {
  const passport = new Passport();
  passport.use(
    new LocalStrategy(
      { usernameField: 'email', passwordField: 'password', passReqToCallback: true },
      (req, email, password, done) => {
        verifyCredentials(ctx, email, password, clientIp(req)).then(
          (user) => done(null, user ?? false),
          (error: unknown) => done(error),
        );
      },
    ),
  );
  passport.serializeUser((user, done) => done(null, String(user.id)));
  passport.deserializeUser((id: string, done) => {
    User.query()
      .findById(Number(id))
      .then((user) => done(null, user && !user.disabled ? user : false))
      .catch((error: unknown) => done(error));
  });

  const PgStore = connectPgSimple(session);
  const pool = new pg.Pool({ connectionString: ctx.config.databaseUrl, max: 4 });
  const store = new PgStore({
    pool,
    tableName: 'session',
    createTableIfMissing: false,
    pruneSessionInterval: 15 * 60,
  });
  const secureCookies = ctx.config.trustProxy && ctx.config.publicUrl.startsWith('https://');
  const sessionMiddleware = session({
    name: sessionCookieName,
    secret: ctx.sessionSecret,
    store,
    resave: false,
    saveUninitialized: false,
    rolling: true,
    proxy: ctx.config.trustProxy,
    cookie: {
      httpOnly: true,
      sameSite: 'lax',
      // Behind a TLS-terminating proxy the cookie is only sent over https.
      secure: ctx.config.trustProxy ? 'auto' : false,
      maxAge: ctx.config.sessionMaxAgeDays * 24 * 3600 * 1000,
    },
  });

  const csrf = doubleCsrf({
    getSecret: () => ctx.sessionSecret,
    getSessionIdentifier: (req) => req.session?.id ?? '',
    cookieName: csrfCookieName,
    cookieOptions: { sameSite: 'lax', secure: secureCookies, httpOnly: true, path: '/' },
    getCsrfTokenFromRequest: (req) => req.headers[csrfHeaderName],
  });

  const tokenOrSession: RequestHandler = (req, res, next) => {
    const token = bearerToken(req);
    if (token === undefined) {
      req.authMethod = 'session';
      sessionMiddleware(req, res, (error?: unknown) => {
        if (error) return next(error);
        passport.session()(req, res, next);
      });
      return;
    }
    findUserByToken(token)
      .then((user) => {
        if (!user)
          return next(
            unauthenticated('This API token is not valid (revoked, mistyped or its account is disabled).'),
          );
        req.user = user;
        req.authMethod = 'token';
        next();
      })
      .catch(next);
  };

  const checkCsrf: RequestHandler = (req, _res, next) => {
    const safe = req.method === 'GET' || req.method === 'HEAD' || req.method === 'OPTIONS';
    if (safe || req.authMethod === 'token' || csrf.validateRequest(req)) return next();
    next(
      new AppError(
        'csrf_invalid',
        'The security token of this page is missing or out of date. Reload the page and try again.',
      ),
    );
  };

  return {
    middleware: [parseCookies, tokenOrSession, passport.initialize()],
    checkCsrf,
    passport,
    issueCsrfToken(req, res) {
      // Mark the session so it is stored (and its id stays stable) even before sign-in.
      req.session.csrfIssuedAt ??= Date.now();
      return csrf.generateCsrfToken(req, res);
    },
    async close() {
      // Stops the store's expired-session pruning timer, then the pool it used.
      await store.close();
      await pool.end();
    },
  };
}
