/** The OpenAPI 3.0 document, generated from the route declarations and their zod schemas. */
import { OpenAPIRegistry, OpenApiGeneratorV3 } from '@asteasolutions/zod-to-openapi';

import { type AnyRouteSpec, registerRoutes } from './http/api-route';

export function buildOpenApiDocument(routes: AnyRouteSpec[], version: string): object {
  const registry = new OpenAPIRegistry();
  registerRoutes(registry, [...routes]);
  registry.registerPath({
    method: 'get',
    path: '/api/openapi.json',
    summary: 'This document',
    tags: ['Service'],
    responses: { 200: { description: 'OpenAPI 3.0 document' } },
  });
  return new OpenApiGeneratorV3(registry.definitions).generateDocument({
    openapi: '3.0.3',
    info: {
      title: 'Skysieve API',
      version,
      description:
        'Sign in with a session cookie (state-changing requests need x-csrf-token from GET /api/auth/csrf) or send a personal API token as Authorization: Bearer <token>. Errors answer { error: { code, message, details? } }.',
    },
    servers: [{ url: '/' }],
  });
}
