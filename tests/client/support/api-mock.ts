/**
 * A fetch replacement for client tests: only the routes a test declares answer; any other request
 * fails the test (it is recorded and `expectNoUnexpectedCalls` throws), so a page cannot quietly call
 * an endpoint the test did not think about. `GET /api/auth/csrf` is declared for every test, since the
 * API client fetches it before any state-changing request.
 */
import { vi } from 'vitest';

export interface MockRequest {
  method: string;
  path: string;
  query: URLSearchParams;
  params: Record<string, string>;
  body: unknown;
  headers: Record<string, string>;
}

export interface MockAnswer {
  status?: number;
  body?: unknown;
}

/** A handler returns the answer; a plain value is sent as a 200 JSON body. */
export type MockHandler = (request: MockRequest) => MockAnswer | Promise<MockAnswer>;
export type MockRoutes = Record<string, MockHandler | MockAnswer>;

/** `{ error: { code, message } }` with its status, as the server sends it. */
export function apiError(status: number, code: string, message: string): MockAnswer {
  return { status, body: { error: { code, message } } };
}

function compile(pattern: string): { method: string; regex: RegExp; names: string[] } {
  const [method = '', path = ''] = pattern.split(' ');
  const names: string[] = [];
  const source = path.replace(/[.*+?^${}()|[\]\\]/g, '\\$&').replace(/:(\w+)/g, (_match, name: string) => {
    names.push(name);
    return '([^/]+)';
  });
  return { method, regex: new RegExp(`^${source}$`), names };
}

export function mockApi(routes: MockRoutes) {
  const declared: MockRoutes = { 'GET /api/auth/csrf': { body: { token: 'test-csrf-token' } }, ...routes };
  const table = Object.entries(declared).map(([pattern, handler]) => ({
    pattern,
    ...compile(pattern),
    handler,
  }));
  const calls: MockRequest[] = [];
  const unexpected: string[] = [];

  const fetchMock = vi.fn(async (input: string | URL | Request, init: RequestInit = {}) => {
    const url = new URL(String(input), 'http://skysieve.test');
    const method = (init.method ?? 'GET').toUpperCase();
    const headers = Object.fromEntries(Object.entries((init.headers ?? {}) as Record<string, string>));
    for (const route of table) {
      if (route.method !== method) continue;
      const match = route.regex.exec(url.pathname);
      if (!match) continue;
      const params = Object.fromEntries(route.names.map((name, index) => [name, match[index + 1] ?? '']));
      const request: MockRequest = {
        method,
        path: url.pathname,
        query: url.searchParams,
        params,
        body: typeof init.body === 'string' ? JSON.parse(init.body) : undefined,
        headers,
      };
      calls.push(request);
      const answer = typeof route.handler === 'function' ? await route.handler(request) : route.handler;
      const status = answer.status ?? 200;
      const noBody = status === 204 || answer.body === undefined;
      return new Response(noBody ? null : JSON.stringify(answer.body), {
        status,
        headers: noBody ? {} : { 'content-type': 'application/json' },
      });
    }
    unexpected.push(`${method} ${url.pathname}${url.search}`);
    throw new TypeError(`The test did not declare ${method} ${url.pathname}`);
  });
  vi.stubGlobal('fetch', fetchMock);

  return {
    calls,
    /** Requests to one declared pattern, e.g. `callsTo('POST /api/projects')`. */
    callsTo(pattern: string): MockRequest[] {
      const route = compile(pattern);
      return calls.filter((call) => call.method === route.method && route.regex.test(call.path));
    },
    expectNoUnexpectedCalls(): void {
      if (unexpected.length > 0) throw new Error(`Undeclared API requests: ${unexpected.join(', ')}`);
    },
  };
}
