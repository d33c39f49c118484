/**
 * Builds the Express app from its context (no listen): security headers, JSON parsing, authentication
 * (token or session + CSRF), every feature's routes, the OpenAPI document, the built client with SPA
 * fallback, and the one error middleware.
 */
import { existsSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

import express, { type Express } from 'express';
import helmet from 'helmet';

import { adminRoutes } from './admin/admin.routes';
import { authRoutes } from './auth/auth.routes';
import { createAuthentication } from './auth/authentication';
import { comparisonRoutes } from './comparisons/comparisons.routes';
import type { AppContext } from './context';
import { crossMatchRoutes } from './cross-match/cross-match.routes';
import { healthRoutes } from './health/health.routes';
import { type AnyRouteSpec, mountRoutes } from './http/api-route';
import { apiNotFound, errorHandler } from './http/error-handler';
import { imageRoutes } from './images/images.routes';
import { injectionRoutes } from './injection/injection.routes';
import { buildOpenApiDocument } from './openapi';
import { projectRoutes } from './projects/projects.routes';
import { quicklookRoutes } from './runs/quicklook.routes';
import { jointRunRoutes } from './runs/joint-runs.routes';
import { runRoutes } from './runs/runs.routes';
import { storageRoutes } from './storage/storage.routes';
import { tokenRoutes } from './tokens/tokens.routes';

export const defaultClientDirectory = fileURLToPath(new URL('../dist', import.meta.url));

export interface AppOptions {
  /** Folder of the built client; served with SPA fallback when it holds index.html. */
  clientDirectory?: string;
  /** Routes of later features, mounted and documented like the built-in ones. */
  extraRoutes?: AnyRouteSpec[];
}

export interface SkysieveApp {
  app: Express;
  routes: AnyRouteSpec[];
  /** Releases what the app holds itself (the session store's pool). */
  close(): Promise<void>;
}

export function createApp(ctx: AppContext, options: AppOptions = {}): SkysieveApp {
  const app = express();
  app.disable('x-powered-by');
  if (ctx.config.trustProxy) app.set('trust proxy', 1);

  app.use(
    helmet({
      contentSecurityPolicy: {
        useDefaults: true,
        directives: {
          'default-src': ["'self'"],
          'script-src': ["'self'"],
          // Quasar sets inline styles on components.
          'style-src': ["'self'", "'unsafe-inline'"],
          'font-src': ["'self'", 'data:'],
          'img-src': ["'self'", 'data:', 'blob:'],
          'worker-src': ["'self'", 'blob:'],
          'connect-src': ["'self'"],
          'object-src': ["'none'"],
          'frame-ancestors': ["'none'"],
          // Only behind TLS; on plain http (local use) upgrading would break the app.
          'upgrade-insecure-requests': ctx.config.trustProxy ? [] : null,
        },
      },
      // Same origin-agent rules without TLS would make Chromium complain on http.
      strictTransportSecurity: ctx.config.trustProxy,
    }),
  );

  const authentication = createAuthentication(ctx);
  const routes: AnyRouteSpec[] = [
    ...healthRoutes(ctx),
    ...authRoutes(ctx, authentication),
    ...tokenRoutes,
    ...projectRoutes(ctx),
    ...adminRoutes,
    ...imageRoutes(ctx),
    ...storageRoutes(ctx),
    ...runRoutes(ctx),
    ...jointRunRoutes(ctx),
    ...quicklookRoutes(ctx),
    ...injectionRoutes(ctx),
    ...crossMatchRoutes(ctx),
    ...comparisonRoutes(ctx),
    ...(options.extraRoutes ?? []),
  ];
  const openApiDocument = buildOpenApiDocument(routes, ctx.version);

  if (ctx.config.logRequests) {
    // Method, path, status and time only: never bodies (passwords) or query strings (tokens).
    app.use((req, res, next) => {
      const started = process.hrtime.bigint();
      res.on('finish', () => {
        const ms = Number(process.hrtime.bigint() - started) / 1e6;
        ctx.logger.info(`${req.method} ${req.path} ${res.statusCode} ${ms.toFixed(1)} ms`);
      });
      next();
    });
  }

  const api = express.Router();
  api.use(express.json({ limit: '1mb' }));
  api.use(...authentication.middleware);
  api.get('/api/openapi.json', (_req, res) => {
    res.json(openApiDocument);
  });
  mountRoutes(api, routes, authentication.checkCsrf);
  api.use('/api', apiNotFound);
  app.use(api);

  const clientDirectory = options.clientDirectory ?? defaultClientDirectory;
  const indexHtml = path.join(clientDirectory, 'index.html');
  if (existsSync(indexHtml)) {
    app.use(express.static(clientDirectory, { index: false, maxAge: '1h' }));
    app.get('/{*splat}', (_req, res) => {
      res.setHeader('Cache-Control', 'no-cache');
      res.sendFile(indexHtml);
    });
  }

  app.use(errorHandler((error) => ctx.logger.error(error)));
  return { app, routes, close: () => authentication.close() };
}
