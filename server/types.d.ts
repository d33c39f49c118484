/// <reference types="passport" />
import type { Membership } from './models/membership';
import type { Project } from './models/project';
import type { User as UserModel } from './models/user';

declare global {
  namespace Express {
    // Passport's req.user is the signed-in account.
    // eslint-disable-next-line @typescript-eslint/no-empty-object-type
    interface User extends UserModel {}
    interface Request {
      /** How the caller proved who they are: a session cookie or an API token. */
      authMethod?: 'session' | 'token';
      /** Parsed Cookie header. */
      cookies: Record<string, string>;
      /** Set by loadProject(): the project and the caller's access to it. */
      projectAccess?: ProjectAccess;
    }
  }
}

export interface ProjectAccess {
  project: Project;
  /** The caller's membership, or null for an admin who is not a member. */
  membership: Membership | null;
}

declare module 'express-session' {
  interface SessionData {
    csrfIssuedAt?: number;
  }
}
