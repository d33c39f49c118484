/**
 * The one typed HTTP client of the app. Every answer is parsed with the shared zod schemas; every failure
 * becomes an ApiError carrying the server's message. Cookie sessions send the CSRF token on every
 * state-changing request (fetched lazily, refreshed after sign-in/sign-out, retried once when rejected).
 */
import { z } from 'zod';

import { errorBodySchema, type ErrorCode, type FieldIssue, fieldIssueSchema } from '@shared/errors';
import { healthSchema, publicConfigSchema } from '@shared/health';
import {
  csrfTokenResponseSchema,
  invitationPreviewSchema,
  userResponseSchema,
  type LoginRequest,
  type PasswordChangeRequest,
  type PasswordResetConfirm,
  type SignupRequest,
  type UpdateMeRequest,
} from '@shared/auth';
import { apiTokenListSchema, createdTokenSchema, type CreateTokenRequest } from '@shared/tokens';
import {
  invitationCreatedResponseSchema,
  invitationListSchema,
  memberAddedResponseSchema,
  memberListSchema,
  memberSchema,
  projectDetailSchema,
  projectListSchema,
  projectSummarySchema,
  type AddMemberRequest,
  type CreateProjectRequest,
  type Invitation,
  type Member,
  type ProjectRole,
  type UpdateProjectRequest,
} from '@shared/projects';
import {
  adminUserListSchema,
  adminUserSchema,
  auditPageSchema,
  devMailListSchema,
  devMailMessageSchema,
  type AdminUpdateUserRequest,
  type AuditAction,
} from '@shared/admin';

/** A failed API call: `status` 0 means the server could not be reached or answered something unreadable. */
export class ApiError extends Error {
  readonly status: number;
  readonly code: ErrorCode | 'network' | 'unexpected_response';
  readonly details: unknown;

  constructor(status: number, code: ApiError['code'], message: string, details?: unknown) {
    super(message);
    this.name = 'ApiError';
    this.status = status;
    this.code = code;
    this.details = details;
  }

  /** Per-field validation problems, when the server sent them. */
  get fieldIssues(): FieldIssue[] {
    const parsed = z.object({ issues: z.array(fieldIssueSchema) }).safeParse(this.details);
    return parsed.success ? parsed.data.issues : [];
  }
}

type Method = 'GET' | 'POST' | 'PATCH' | 'PUT' | 'DELETE';
type Query = Record<string, string | number | boolean | undefined>;

interface RequestOptions<T> {
  body?: unknown;
  query?: Query;
  /** Schema of a 2xx answer with a body; omitted for 202/204 answers whose body is ignored. */
  schema?: z.ZodType<T>;
}

export interface ApiClientOptions {
  /** Defaults to the global fetch; tests pass a mock. */
  fetch?: typeof fetch;
  /** Prefix of every path, e.g. '' in the browser (same origin). */
  baseUrl?: string;
}

function withQuery(path: string, query: Query | undefined): string {
  if (!query) return path;
  const search = new URLSearchParams();
  for (const [key, value] of Object.entries(query))
    if (value !== undefined && value !== '') search.set(key, String(value));
  const text = search.toString();
  return text ? `${path}?${text}` : path;
}

export function createApiClient(options: ApiClientOptions = {}) {
  const baseUrl = options.baseUrl ?? '';
  const doFetch = (input: string, init: RequestInit) => (options.fetch ?? globalThis.fetch)(input, init);
  let csrfToken: Promise<string> | null = null;
  let onSessionEnded: (() => void) | null = null;

  async function send(method: Method, url: string, body: unknown): Promise<Response> {
    const headers: Record<string, string> = { accept: 'application/json' };
    if (body !== undefined) headers['content-type'] = 'application/json';
    if (method !== 'GET') headers['x-csrf-token'] = await csrf();
    try {
      return await doFetch(baseUrl + url, {
        method,
        headers,
        credentials: 'same-origin',
        body: body === undefined ? undefined : JSON.stringify(body),
      });
    } catch {
      throw new ApiError(
        0,
        'network',
        'The Skysieve server cannot be reached. Check your connection and try again.',
      );
    }
  }

  async function errorFrom(response: Response): Promise<ApiError> {
    const json: unknown = await response.json().catch(() => undefined);
    const parsed = errorBodySchema.safeParse(json);
    if (parsed.success) {
      const { code, message, details } = parsed.data.error;
      return new ApiError(response.status, code, message, details);
    }
    return new ApiError(
      response.status,
      'unexpected_response',
      `The server answered ${response.status} ${response.statusText || ''}`.trim() +
        ' without an explanation.',
    );
  }

  async function request<T>(method: Method, path: string, opts: RequestOptions<T> = {}): Promise<T> {
    const url = withQuery(path, opts.query);
    let response = await send(method, url, opts.body);
    if (!response.ok) {
      let error = await errorFrom(response);
      if (error.code === 'csrf_invalid' && method !== 'GET') {
        // The session changed under us (expired, signed in elsewhere): fetch a fresh token and retry once.
        csrfToken = null;
        response = await send(method, url, opts.body);
        if (response.ok) return parse(response, opts.schema, method, path);
        error = await errorFrom(response);
      }
      // A session that ended elsewhere (expired, account disabled); "who is signed in?" and sign-in itself
      // answer 401 as part of their normal job.
      if (error.code === 'unauthenticated' && path !== '/api/auth/me' && path !== '/api/auth/login') {
        onSessionEnded?.();
      }
      throw error;
    }
    return parse(response, opts.schema, method, path);
  }

  async function parse<T>(
    response: Response,
    schema: z.ZodType<T> | undefined,
    method: Method,
    path: string,
  ) {
    if (!schema) return undefined as T;
    const json: unknown = await response.json().catch(() => undefined);
    const parsed = schema.safeParse(json);
    if (!parsed.success) {
      throw new ApiError(
        response.status,
        'unexpected_response',
        `The server's answer to ${method} ${path} did not have the expected shape.`,
        { issues: parsed.error.issues.map((issue) => ({ path: issue.path, message: issue.message })) },
      );
    }
    return parsed.data;
  }

  function csrf(): Promise<string> {
    csrfToken ??= (async () => {
      const response = await doFetch(`${baseUrl}/api/auth/csrf`, {
        method: 'GET',
        headers: { accept: 'application/json' },
        credentials: 'same-origin',
      }).catch(() => {
        throw new ApiError(
          0,
          'network',
          'The Skysieve server cannot be reached. Check your connection and try again.',
        );
      });
      if (!response.ok) throw await errorFrom(response);
      return (await parse(response, csrfTokenResponseSchema, 'GET', '/api/auth/csrf')).token;
    })().catch((error: unknown) => {
      csrfToken = null;
      throw error;
    });
    return csrfToken;
  }

  /** The token is tied to the session: forget it whenever the session changes. */
  function resetCsrf(): void {
    csrfToken = null;
  }

  /** Called when the server says the session has ended, so the app can send the user to sign-in. */
  function whenSessionEnds(handler: (() => void) | null): void {
    onSessionEnded = handler;
  }

  const id = (value: number) => encodeURIComponent(String(value));

  return {
    request,
    resetCsrf,
    whenSessionEnds,
    config: {
      public: () => request('GET', '/api/config/public', { schema: publicConfigSchema }),
      health: () => request('GET', '/api/health', { schema: healthSchema }),
    },
    auth: {
      me: () => request('GET', '/api/auth/me', { schema: userResponseSchema }),
      login: (body: LoginRequest) => request('POST', '/api/auth/login', { body, schema: userResponseSchema }),
      signup: (body: SignupRequest) =>
        request('POST', '/api/auth/signup', { body, schema: userResponseSchema }),
      logout: () => request<void>('POST', '/api/auth/logout'),
      updateMe: (body: UpdateMeRequest) =>
        request('PATCH', '/api/auth/me', { body, schema: userResponseSchema }),
      changePassword: (body: PasswordChangeRequest) => request<void>('POST', '/api/auth/password', { body }),
      requestReset: (email: string) =>
        request<void>('POST', '/api/auth/password-reset/request', { body: { email } }),
      confirmReset: (body: PasswordResetConfirm) =>
        request<void>('POST', '/api/auth/password-reset/confirm', { body }),
      invitation: (token: string) =>
        request('GET', `/api/auth/invitations/${encodeURIComponent(token)}`, {
          schema: invitationPreviewSchema,
        }),
    },
    tokens: {
      list: () => request('GET', '/api/tokens', { schema: apiTokenListSchema }),
      create: (body: CreateTokenRequest) =>
        request('POST', '/api/tokens', { body, schema: createdTokenSchema }),
      revoke: (tokenId: number) => request<void>('DELETE', `/api/tokens/${id(tokenId)}`),
    },
    projects: {
      list: (all = false) =>
        request('GET', '/api/projects', {
          query: { all: all ? 'true' : undefined },
          schema: projectListSchema,
        }),
      create: (body: CreateProjectRequest) =>
        request('POST', '/api/projects', { body, schema: projectSummarySchema }),
      get: (projectId: number) =>
        request('GET', `/api/projects/${id(projectId)}`, { schema: projectDetailSchema }),
      update: (projectId: number, body: UpdateProjectRequest) =>
        request('PATCH', `/api/projects/${id(projectId)}`, { body, schema: projectSummarySchema }),
      remove: (projectId: number, confirmName: string) =>
        request<void>('DELETE', `/api/projects/${id(projectId)}`, { body: { confirmName } }),
      members: (projectId: number) =>
        request('GET', `/api/projects/${id(projectId)}/members`, { schema: memberListSchema }),
      /** An existing account becomes a member at once; an unknown address gets an invitation e-mail. */
      addMember: (projectId: number, body: AddMemberRequest) =>
        request('POST', `/api/projects/${id(projectId)}/members`, {
          body,
          schema: z.union([memberAddedResponseSchema, invitationCreatedResponseSchema]),
        }) as Promise<{ member: Member } | { invitation: Invitation }>,
      updateMember: (projectId: number, userId: number, role: ProjectRole) =>
        request('PATCH', `/api/projects/${id(projectId)}/members/${id(userId)}`, {
          body: { role },
          schema: memberSchema,
        }),
      removeMember: (projectId: number, userId: number) =>
        request<void>('DELETE', `/api/projects/${id(projectId)}/members/${id(userId)}`),
      leave: (projectId: number) => request<void>('POST', `/api/projects/${id(projectId)}/leave`),
      invitations: (projectId: number) =>
        request('GET', `/api/projects/${id(projectId)}/invitations`, { schema: invitationListSchema }),
      revokeInvitation: (projectId: number, invitationId: number) =>
        request<void>('DELETE', `/api/projects/${id(projectId)}/invitations/${id(invitationId)}`),
    },
    admin: {
      users: () => request('GET', '/api/admin/users', { schema: adminUserListSchema }),
      updateUser: (userId: number, body: AdminUpdateUserRequest) =>
        request('PATCH', `/api/admin/users/${id(userId)}`, { body, schema: adminUserSchema }),
      audit: (query: { action?: AuditAction; actorId?: number; page?: number; pageSize?: number }) =>
        request('GET', '/api/admin/audit', { query, schema: auditPageSchema }),
      mail: () => request('GET', '/api/admin/mail', { schema: devMailListSchema }),
      mailMessage: (mailId: number) =>
        request('GET', `/api/admin/mail/${id(mailId)}`, { schema: devMailMessageSchema }),
    },
  };
}

export type ApiClient = ReturnType<typeof createApiClient>;

/** The app's client (same origin as the page). */
export const api = createApiClient();
