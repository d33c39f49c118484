/**
 * One declaration per API route: method, path, access, zod schemas for input and output, handler.
 * The same declaration mounts the Express route and registers it in the OpenAPI document,
 * so the document cannot miss a route.
 */
import type { OpenAPIRegistry } from '@asteasolutions/zod-to-openapi';
import type { NextFunction, Request, RequestHandler, Response, Router } from 'express';
import type { ParamsDictionary, Query } from 'express-serve-static-core';
import type { ZodType, z } from 'zod';

import { errorBodySchema } from '../../shared/errors';
import { requireAdmin, requireSignIn } from './guards';
import { validate } from './validate';

type Output<S, Default> = S extends ZodType ? z.output<S> : Default;

/** A request whose body (B), params (P) and query (Q) were parsed by the route's schemas. */
export type ApiRequest<B = unknown, P = ParamsDictionary, Q = Query> = Request<P, unknown, B, Q>;

export type Access = 'public' | 'signed-in' | 'admin';

export interface RouteResponse {
  description: string;
  schema?: ZodType;
}

export interface RouteSpec<
  B extends ZodType | undefined,
  P extends ZodType | undefined,
  Q extends ZodType | undefined,
> {
  method: 'get' | 'post' | 'patch' | 'put' | 'delete';
  /** Express path, e.g. /api/projects/:id */
  path: string;
  summary: string;
  tag: string;
  access: Access;
  body?: B;
  params?: P;
  query?: Q;
  responses: Record<number, RouteResponse>;
  /** Run before the access check (rate limits). */
  before?: RequestHandler[];
  /** Run after params/query validation and before body validation (e.g. loadProject). */
  load?: RequestHandler[];
  handler: (
    req: ApiRequest<Output<B, unknown>, Output<P, ParamsDictionary>, Output<Q, Query>>,
    res: Response,
    next: NextFunction,
  ) => unknown;
}

// eslint-disable-next-line @typescript-eslint/no-explicit-any
export type AnyRouteSpec = RouteSpec<any, any, any>;

/** Identity with inference: gives the handler typed req.body / req.params / req.query. */
export function defineRoute<
  B extends ZodType | undefined = undefined,
  P extends ZodType | undefined = undefined,
  Q extends ZodType | undefined = undefined,
>(spec: RouteSpec<B, P, Q>): RouteSpec<B, P, Q> {
  return spec;
}

const guards: Record<Access, RequestHandler[]> = {
  public: [],
  'signed-in': [requireSignIn],
  admin: [requireAdmin],
};

/** Mounts each route: rate limits → access guard → CSRF → params/query → loaders → body → handler. */
export function mountRoutes(router: Router, routes: AnyRouteSpec[], checkCsrf: RequestHandler): void {
  for (const spec of routes) {
    const handlers: RequestHandler[] = [
      ...(spec.before ?? []),
      ...guards[spec.access],
      checkCsrf,
      validate({ params: spec.params, query: spec.query }),
      ...(spec.load ?? []),
      validate({ body: spec.body }),
      spec.handler as unknown as RequestHandler,
    ];
    router[spec.method](spec.path, ...handlers);
  }
}

const errorDescriptions: Record<number, string> = {
  400: 'Invalid input',
  401: 'Not signed in',
  403: 'Not allowed',
  404: 'Not found (or not visible to the caller)',
  409: 'Conflict with existing data',
  413: 'Too large',
  422: 'Unprocessable content',
  429: 'Too many attempts',
};

/** Adds every route to an OpenAPI registry; the errors a route can answer are listed with the shared error body. */
export function registerRoutes(registry: OpenAPIRegistry, routes: AnyRouteSpec[]): void {
  registry.registerComponent('securitySchemes', 'sessionCookie', {
    type: 'apiKey',
    in: 'cookie',
    name: 'skysieve.sid',
    description:
      'Session cookie; state-changing requests also need the x-csrf-token header (GET /api/auth/csrf).',
  });
  registry.registerComponent('securitySchemes', 'apiToken', {
    type: 'http',
    scheme: 'bearer',
    description: 'Personal API token (POST /api/tokens); no CSRF token needed.',
  });
  for (const spec of routes) {
    const responses: Record<string, object> = {};
    for (const [status, response] of Object.entries(spec.responses)) {
      responses[status] = response.schema
        ? { description: response.description, content: { 'application/json': { schema: response.schema } } }
        : { description: response.description };
    }
    const errorStatuses = new Set<number>([400, ...(spec.access === 'public' ? [] : [401])]);
    if (spec.access === 'admin') errorStatuses.add(403);
    for (const status of Object.keys(spec.responses).map(Number)) errorStatuses.delete(status);
    for (const status of errorStatuses) {
      responses[String(status)] ??= {
        description: errorDescriptions[status] ?? 'Error',
        content: { 'application/json': { schema: errorBodySchema } },
      };
    }
    registry.registerPath({
      method: spec.method,
      path: spec.path.replace(/:(\w+)/g, '{$1}'),
      summary: spec.summary,
      tags: [spec.tag],
      security: spec.access === 'public' ? [] : [{ sessionCookie: [] }, { apiToken: [] }],
      request: {
        params: spec.params,
        query: spec.query,
        body: spec.body ? { content: { 'application/json': { schema: spec.body } } } : undefined,
      },
      // eslint-disable-next-line @typescript-eslint/no-explicit-any
      responses: responses as any,
    });
  }
}

/** Error responses a route declares beyond the defaults. */
export const errors = (...statuses: number[]): Record<number, RouteResponse> =>
  Object.fromEntries(
    statuses.map((status) => [
      status,
      { description: errorDescriptions[status] ?? 'Error', schema: errorBodySchema },
    ]),
  );
