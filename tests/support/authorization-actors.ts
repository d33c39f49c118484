/**
 * The callers every authorization matrix tries, and the statuses the project rules give them: a project (or
 * anything in it) the caller cannot see answers 404, never 403; visible but not allowed answers 403; signed out
 * answers 401. "owner token" is a Bearer token of the project's owner.
 */
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
