/**
 * The callers every authorization matrix tries, and the statuses the project rules give them: a project (or
 * anything in it) the caller cannot see answers 404, never 403; visible but not allowed answers 403; signed out
 * answers 401. "owner token" is a Bearer token of the project's owner.
 */
import type { User } from '../../server/models/user';
import { createToken } from '../../server/tokens/tokens.service';
import { BrowserClient, createUser, signIn, type TestApp, TokenClient } from './test-app';

export type Actor = 'admin' | 'owner' | 'editor' | 'viewer' | 'non-member' | 'signed-out' | 'owner token';
export const actors: Actor[] = [
  'admin',
  'owner',
  'editor',
  'viewer',
  'non-member',
  'signed-out',
  'owner token',
];

/** A read: every member and an admin (not a member) may. */
export const readStatuses: Record<Actor, number> = {
  admin: 200,
  owner: 200,
  editor: 200,
  viewer: 200,
  'non-member': 404,
  'signed-out': 401,
  'owner token': 200,
};

/** A change only owners (and admins) may make; `ok` is the status of an allowed call. */
export const ownersOnlyStatuses = (ok: number): Record<Actor, number> => ({
  admin: ok,
  owner: ok,
  editor: 403,
  viewer: 403,
  'non-member': 404,
  'signed-out': 401,
  'owner token': ok,
});

/** A change owners, editors and admins may make; `ok` is the status of an allowed call. */
export const editorsStatuses = (ok: number): Record<Actor, number> => ({
  admin: ok,
  owner: ok,
  editor: ok,
  viewer: 403,
  'non-member': 404,
  'signed-out': 401,
  'owner token': ok,
});

/** The signed-in clients of an authorization matrix: `callers` has one for every actor. */
export interface MatrixClients {
  callers: Map<Actor, BrowserClient | TokenClient>;
  owner: BrowserClient;
  editor: BrowserClient;
  viewer: BrowserClient;
}

/**
 * Signs in every actor of a project with these members: a new admin (not a member), the owner, editor and
 * viewer, a new non-member, a client with no session, and a Bearer token of the owner named `tokenName`.
 */
export async function signInActors(
  t: TestApp,
  members: { owner: User; editor: User; viewer: User },
  tokenName: string,
): Promise<MatrixClients> {
  const admin = await createUser(t.ctx, { role: 'admin' });
  const outsider = await createUser(t.ctx);
  const owner = await signIn(t.app, members.owner.email);
  const editor = await signIn(t.app, members.editor.email);
  const viewer = await signIn(t.app, members.viewer.email);
  const callers = new Map<Actor, BrowserClient | TokenClient>([
    ['admin', await signIn(t.app, admin.email)],
    ['owner', owner],
    ['editor', editor],
    ['viewer', viewer],
    ['non-member', await signIn(t.app, outsider.email)],
    ['signed-out', new BrowserClient(t.app)],
    ['owner token', new TokenClient(t.app, (await createToken(members.owner, tokenName, null)).token)],
  ]);
  return { callers, owner, editor, viewer };
}
