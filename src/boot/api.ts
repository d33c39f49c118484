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
  sessionResponseSchema,
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
import {
  decodePixelView,
  imageSummarySchema,
  storageUsageSchema,
  type ImageSummary,
  type PixelView,
} from '@shared/images';

/** A failed API call: `status` 0 means the server could not be reached or answered something unreadable. */
export class ApiError extends Error {
  readonly status: number;
  /** 'cancelled': the caller stopped the request (e.g. an upload) before the server answered. */
  readonly code: ErrorCode | 'network' | 'unexpected_response' | 'cancelled';
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

/** What an upload reports while the file is being sent. */
export interface UploadProgress {
  loaded: number;
  /** null when the browser cannot tell the size being sent. */
  total: number | null;
}

export interface UploadImageOptions {
  /** Image name; the server uses the file name without its extension when omitted. */
  name?: string;
  /** 1-based plane of a FITS cube. */
  plane?: number;
  onProgress?: (progress: UploadProgress) => void;
  /** Aborting it cancels the upload; the promise then rejects with an ApiError of code 'cancelled'. */
  signal?: AbortSignal;
}

const UNREACHABLE = 'The Skysieve server cannot be reached. Check your connection and try again.';
/** How many decoded pixel views the client keeps for ETag revalidation (each up to 16 MiB at 2048²). */
const PIXEL_VIEW_CACHE_ENTRIES = 4;

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
      throw new ApiError(0, 'network', UNREACHABLE);
    }
  }

  function errorFromBody(status: number, statusText: string, json: unknown): ApiError {
    const parsed = errorBodySchema.safeParse(json);
    if (parsed.success) {
      const { code, message, details } = parsed.data.error;
      return new ApiError(status, code, message, details);
    }
    return new ApiError(
      status,
      'unexpected_response',
      `The server answered ${status} ${statusText || ''}`.trim() + ' without an explanation.',
    );
  }

  async function errorFrom(response: Response): Promise<ApiError> {
    const json: unknown = await response.json().catch(() => undefined);
    return errorFromBody(response.status, response.statusText, json);
  }

  function reportSessionEnd(error: ApiError, path: string): void {
    // A session that ended elsewhere (expired, account disabled); "who is signed in?" and sign-in itself
    // answer 401 as part of their normal job.
    if (error.code === 'unauthenticated' && path !== '/api/auth/me' && path !== '/api/auth/login') {
      onSessionEnded?.();
    }
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
      reportSessionEnd(error, path);
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

  const pixelViews = new Map<string, { etag: string; view: PixelView }>();

  /**
   * GET of a binary pixel view. The answer's ETag is remembered, so asking again for the same view sends
   * If-None-Match and a 304 reuses the decoded view instead of moving the bytes again.
   */
  async function requestPixelView(path: string, query: Query): Promise<PixelView> {
    const url = withQuery(path, query);
    const cached = pixelViews.get(url);
    const headers: Record<string, string> = { accept: 'application/octet-stream' };
    if (cached) headers['if-none-match'] = cached.etag;
    let response: Response;
    try {
      response = await doFetch(baseUrl + url, { method: 'GET', headers, credentials: 'same-origin' });
    } catch {
      throw new ApiError(0, 'network', UNREACHABLE);
    }
    if (response.status === 304 && cached) return cached.view;
    if (!response.ok) {
      const error = await errorFrom(response);
      reportSessionEnd(error, path);
      throw error;
    }
    let view: PixelView;
    try {
      view = decodePixelView(new Uint8Array(await response.arrayBuffer()));
    } catch (failure) {
      const reason = failure instanceof Error ? failure.message : String(failure);
      throw new ApiError(
        response.status,
        'unexpected_response',
        `The server's pixel view could not be read (${reason})`,
      );
    }
    const etag = response.headers.get('etag');
    pixelViews.delete(url);
    if (etag) {
      pixelViews.set(url, { etag, view });
      // Map keeps insertion order: the first key is the least recently stored view.
      while (pixelViews.size > PIXEL_VIEW_CACHE_ENTRIES) pixelViews.delete(pixelViews.keys().next().value!);
    }
    return view;
  }

  /** One multipart POST through XMLHttpRequest (fetch cannot report upload progress). */
  function sendMultipart(
    path: string,
    form: FormData,
    token: string,
    options: UploadImageOptions,
  ): Promise<{ status: number; statusText: string; json: unknown }> {
    return new Promise((resolve, reject) => {
      const signal = options.signal;
      if (signal?.aborted) {
        reject(new ApiError(0, 'cancelled', 'The upload was cancelled.'));
        return;
      }
      const xhr = new globalThis.XMLHttpRequest();
      const onAbort = () => xhr.abort();
      const finish = () => signal?.removeEventListener('abort', onAbort);
      xhr.open('POST', baseUrl + path);
      xhr.withCredentials = true;
      xhr.setRequestHeader('accept', 'application/json');
      xhr.setRequestHeader('x-csrf-token', token);
      xhr.upload.onprogress = (event: ProgressEvent) => {
        options.onProgress?.({ loaded: event.loaded, total: event.lengthComputable ? event.total : null });
      };
      xhr.onload = () => {
        finish();
        let json: unknown;
        try {
          json = xhr.responseText ? JSON.parse(xhr.responseText) : undefined;
        } catch {
          json = undefined;
        }
        resolve({ status: xhr.status, statusText: xhr.statusText, json });
      };
      xhr.onerror = () => {
        finish();
        reject(new ApiError(0, 'network', UNREACHABLE));
      };
      xhr.onabort = () => {
        finish();
        reject(new ApiError(0, 'cancelled', 'The upload was cancelled.'));
      };
      signal?.addEventListener('abort', onAbort);
      xhr.send(form);
    });
  }

  /**
   * Uploads an image file (multipart `file`, `name`, `plane`) with progress; the 201 answer is parsed with the
   * shared schema, refusals (409, 413, 422, …) become an ApiError with the server's own message.
   */
  async function uploadImage(
    projectId: number,
    file: Blob,
    fileName: string,
    options: UploadImageOptions = {},
  ): Promise<ImageSummary> {
    const path = `/api/projects/${encodeURIComponent(String(projectId))}/images`;
    const form = () => {
      const data = new FormData();
      if (options.name !== undefined) data.set('name', options.name);
      if (options.plane !== undefined) data.set('plane', String(options.plane));
      data.set('file', file, fileName);
      return data;
    };
    let answer = await sendMultipart(path, form(), await csrf(), options);
    if (answer.status < 200 || answer.status >= 300) {
      let error = errorFromBody(answer.status, answer.statusText, answer.json);
      if (error.code === 'csrf_invalid') {
        csrfToken = null;
        answer = await sendMultipart(path, form(), await csrf(), options);
        if (answer.status < 200 || answer.status >= 300)
          error = errorFromBody(answer.status, answer.statusText, answer.json);
      }
      if (answer.status < 200 || answer.status >= 300) {
        reportSessionEnd(error, path);
        throw error;
      }
    }
    const parsed = imageSummarySchema.safeParse(answer.json);
    if (!parsed.success) {
      throw new ApiError(
        answer.status,
        'unexpected_response',
        `The server's answer to POST ${path} did not have the expected shape.`,
        { issues: parsed.error.issues.map((issue) => ({ path: issue.path, message: issue.message })) },
      );
    }
    return parsed.data;
  }

  /**
   * POST of a multipart form (e.g. a catalogue file beside text fields) with the CSRF token; refusals become an
   * ApiError with the server's message, the answer is parsed with `schema`. `form` builds a fresh body per try.
   */
  async function postForm<T>(path: string, form: () => FormData, schema: z.ZodType<T>): Promise<T> {
    const attempt = async () => {
      const token = await csrf();
      try {
        return await doFetch(baseUrl + path, {
          method: 'POST',
          headers: { accept: 'application/json', 'x-csrf-token': token },
          credentials: 'same-origin',
          body: form(),
        });
      } catch {
        throw new ApiError(0, 'network', UNREACHABLE);
      }
    };
    let response = await attempt();
    if (!response.ok) {
      let error = await errorFrom(response);
      if (error.code === 'csrf_invalid') {
        csrfToken = null;
        response = await attempt();
        if (response.ok) return parse(response, schema, 'POST', path);
        error = await errorFrom(response);
      }
      reportSessionEnd(error, path);
      throw error;
    }
    return parse(response, schema, 'POST', path);
  }

  function csrf(): Promise<string> {
    csrfToken ??= (async () => {
      const response = await doFetch(`${baseUrl}/api/auth/csrf`, {
        method: 'GET',
        headers: { accept: 'application/json' },
        credentials: 'same-origin',
      }).catch(() => {
        throw new ApiError(0, 'network', UNREACHABLE);
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
    postForm,
    resetCsrf,
    whenSessionEnds,
    config: {
      public: () => request('GET', '/api/config/public', { schema: publicConfigSchema }),
      health: () => request('GET', '/api/health', { schema: healthSchema }),
    },
    auth: {
      session: () => request('GET', '/api/auth/session', { schema: sessionResponseSchema }),
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
    images: {
      /** Block-averaged float32 view of an image whose longest side is at most `maxSize` (16…4096). */
      pixels: (imageId: number, maxSize = 1024) =>
        requestPixelView(`/api/images/${id(imageId)}/pixels`, { maxSize }),
      upload: uploadImage,
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
      storage: () => request('GET', '/api/admin/storage', { schema: storageUsageSchema }),
    },
  };
}

export type ApiClient = ReturnType<typeof createApiClient>;

/** The app's client (same origin as the page). */
export const api = createApiClient();
