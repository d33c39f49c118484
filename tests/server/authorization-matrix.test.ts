// @vitest-environment node
/**
 * Every role × every project and member action. Roles: admin (not a member), owner, editor, viewer,
 * signed-in non-member, signed-out, and a Bearer token of the owner. A project the caller cannot see
 * answers 404 (never 403); visible but not allowed answers 403. Each case gets a fresh project.
 */
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { createToken } from '../../server/tokens/tokens.service';
import { Invitation } from '../../server/models/invitation';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import type { User } from '../../server/models/user';
import { type Actor, actors, ownersOnlyStatuses, readStatuses } from '../support/authorization-actors';
import {
  BrowserClient,
  createUser,
  signIn,
  startTestApp,
  type TestApp,
  TokenClient,
} from '../support/test-app';

let t: TestApp;
let admin: User;
let outsider: User;
let adminClient: BrowserClient;
let outsiderClient: BrowserClient;
beforeAll(async () => {
  t = await startTestApp();
  admin = await createUser(t.ctx, { role: 'admin' });
  outsider = await createUser(t.ctx);
  adminClient = await signIn(t.app, admin.email);
  outsiderClient = await signIn(t.app, outsider.email);
});
afterAll(async () => {
  await t.close();
});

interface Fixture {
  project: Project;
  owner: User;
  editor: User;
  viewer: User;
  /** An extra viewer for role change / removal. */
  target: User;
  /** An account that is not a member yet (to be added). */
  newcomer: User;
  invitation: Invitation;
}

async function fixture(): Promise<Fixture> {
  const [owner, editor, viewer, target, newcomer] = await Promise.all(
    Array.from({ length: 5 }, () => createUser(t.ctx)),
  );
  const project = await Project.query().insertAndFetch({
    name: 'Matrix field',
    description: '',
    ownerId: owner!.id,
  });
  await Membership.query().insert([
    { projectId: project.id, userId: owner!.id, role: 'owner' },
    { projectId: project.id, userId: editor!.id, role: 'editor' },
    { projectId: project.id, userId: viewer!.id, role: 'viewer' },
    { projectId: project.id, userId: target!.id, role: 'viewer' },
  ]);
  const invitation = await Invitation.query().insertAndFetch({
    projectId: project.id,
    email: `pending-${project.id}@example.org`,
    role: 'viewer',
    tokenHash: 'a'.repeat(64 - String(project.id).length) + String(project.id),
    invitedById: owner!.id,
    expiresAt: new Date(Date.now() + 86_400_000),
    acceptedAt: null,
  });
  return {
    project,
    owner: owner!,
    editor: editor!,
    viewer: viewer!,
    target: target!,
    newcomer: newcomer!,
    invitation,
  };
}

type Caller = Pick<BrowserClient, 'get' | 'post' | 'patch' | 'delete'>;

async function callerFor(actor: Actor, f: Fixture): Promise<Caller> {
  switch (actor) {
    case 'admin':
      return adminClient;
    case 'non-member':
      return outsiderClient;
    case 'owner':
      return signIn(t.app, f.owner.email);
    case 'editor':
      return signIn(t.app, f.editor.email);
    case 'viewer':
      return signIn(t.app, f.viewer.email);
    case 'signed-out':
      return new BrowserClient(t.app);
    case 'owner token':
      return new TokenClient(t.app, (await createToken(f.owner, 'matrix', null)).token);
  }
}

interface Action {
  name: string;
  call(caller: Caller, f: Fixture): PromiseLike<request.Response>;
  /** Expected status per actor. */
  expected: Record<Actor, number>;
  /** Checks the data after an allowed call (and that nothing changed after a refused one). */
  verify?(f: Fixture, allowed: boolean): Promise<void>;
}

const actions: Action[] = [
  { name: 'view project', call: (c, f) => c.get(`/api/projects/${f.project.id}`), expected: readStatuses },
  {
    name: 'list members',
    call: (c, f) => c.get(`/api/projects/${f.project.id}/members`),
    expected: readStatuses,
  },
  {
    name: 'rename project',
    call: (c, f) => c.patch(`/api/projects/${f.project.id}`, { name: 'Renamed field' }),
    expected: ownersOnlyStatuses(200),
    async verify(f, allowed) {
      expect((await Project.query().findById(f.project.id))?.name).toBe(
        allowed ? 'Renamed field' : 'Matrix field',
      );
    },
  },
  {
    name: 'delete project',
    call: (c, f) => c.delete(`/api/projects/${f.project.id}`, { confirmName: 'Matrix field' }),
    expected: ownersOnlyStatuses(204),
    async verify(f, allowed) {
      expect(Boolean(await Project.query().findById(f.project.id))).toBe(!allowed);
    },
  },
  {
    name: 'add member',
    call: (c, f) =>
      c.post(`/api/projects/${f.project.id}/members`, { email: f.newcomer.email, role: 'viewer' }),
    expected: ownersOnlyStatuses(201),
    async verify(f, allowed) {
      const row = await Membership.query().where({ projectId: f.project.id, userId: f.newcomer.id }).first();
      expect(Boolean(row)).toBe(allowed);
    },
  },
  {
    name: 'change member role',
    call: (c, f) => c.patch(`/api/projects/${f.project.id}/members/${f.target.id}`, { role: 'editor' }),
    expected: ownersOnlyStatuses(200),
    async verify(f, allowed) {
      const row = await Membership.query().where({ projectId: f.project.id, userId: f.target.id }).first();
      expect(row?.role).toBe(allowed ? 'editor' : 'viewer');
    },
  },
  {
    name: 'remove member',
    call: (c, f) => c.delete(`/api/projects/${f.project.id}/members/${f.target.id}`),
    expected: ownersOnlyStatuses(204),
    async verify(f, allowed) {
      const row = await Membership.query().where({ projectId: f.project.id, userId: f.target.id }).first();
      expect(Boolean(row)).toBe(!allowed);
    },
  },
  {
    name: 'list invitations',
    call: (c, f) => c.get(`/api/projects/${f.project.id}/invitations`),
    expected: ownersOnlyStatuses(200),
  },
  {
    name: 'withdraw invitation',
    call: (c, f) => c.delete(`/api/projects/${f.project.id}/invitations/${f.invitation.id}`),
    expected: ownersOnlyStatuses(204),
    async verify(f, allowed) {
      expect(Boolean(await Invitation.query().findById(f.invitation.id))).toBe(!allowed);
    },
  },
  {
    name: 'leave project',
    call: (c, f) => c.post(`/api/projects/${f.project.id}/leave`),
    // The only owner cannot leave (409); an admin who is not a member has nothing to leave (404).
    expected: {
      admin: 404,
      owner: 409,
      editor: 204,
      viewer: 204,
      'non-member': 404,
      'signed-out': 401,
      'owner token': 409,
    },
  },
];

describe('authorization matrix: role × project action', () => {
  for (const action of actions) {
    for (const actor of actors) {
      const status = action.expected[actor];
      it(`${action.name} as ${actor} → ${status}`, async () => {
        const f = await fixture();
        const caller = await callerFor(actor, f);
        const response = await action.call(caller, f);
        expect(response.status, `${action.name} as ${actor}: ${JSON.stringify(response.body)}`).toBe(status);
        if (status === 404) expect(response.body.error.code).toBe('not_found');
        if (status === 403) expect(response.body.error.code).toBe('forbidden');
        if (status === 401) expect(response.body.error.code).toBe('unauthenticated');
        await action.verify?.(f, status < 300);
      });
    }
  }

  it('answers 404, not 403, for every nested route of a project the caller cannot see, and for missing projects', async () => {
    const f = await fixture();
    for (const projectId of [f.project.id, 999_999]) {
      const paths = [
        ['get', `/api/projects/${projectId}`],
        ['get', `/api/projects/${projectId}/members`],
        ['get', `/api/projects/${projectId}/invitations`],
        ['patch', `/api/projects/${projectId}/members/${f.viewer.id}`],
        ['delete', `/api/projects/${projectId}/members/${f.viewer.id}`],
        ['delete', `/api/projects/${projectId}/invitations/${f.invitation.id}`],
        ['post', `/api/projects/${projectId}/members`],
        ['post', `/api/projects/${projectId}/leave`],
      ] as const;
      for (const [method, path] of paths) {
        const response = await outsiderClient[method](path, { role: 'viewer', email: 'x@example.org' });
        expect(response.status, `${method} ${path}`).toBe(404);
        expect(response.body).toEqual({ error: { code: 'not_found', message: 'Project not found.' } });
      }
    }
  });

  it('lists only my projects; admins see all only with ?all=true; others cannot use ?all', async () => {
    const f = await fixture();
    const ids = (response: request.Response) =>
      (response.body as { id: number }[]).map((project) => project.id);
    expect(ids(await outsiderClient.get('/api/projects'))).not.toContain(f.project.id);
    expect(ids(await outsiderClient.get('/api/projects?all=true'))).not.toContain(f.project.id);
    expect(ids(await adminClient.get('/api/projects'))).not.toContain(f.project.id);
    const all = await adminClient.get('/api/projects?all=true');
    expect(ids(all)).toContain(f.project.id);
    expect(
      (all.body as { id: number; myRole: string | null }[]).find((p) => p.id === f.project.id)?.myRole,
    ).toBeNull();
    const viewer = await signIn(t.app, f.viewer.email);
    const mine = (await viewer.get('/api/projects')).body as {
      id: number;
      myRole: string;
      memberCount: number;
    }[];
    expect(mine).toEqual([expect.objectContaining({ id: f.project.id, myRole: 'viewer', memberCount: 4 })]);
    expect((await request(t.app).get('/api/projects')).status).toBe(401);
  });

  it('refuses admin routes to members (403), signed-out callers (401) and member tokens (403)', async () => {
    const f = await fixture();
    const { token } = await createToken(f.owner, 'member', null);
    const adminPaths = ['/api/admin/users', '/api/admin/audit', '/api/admin/mail', '/api/admin/mail/1'];
    for (const path of adminPaths) {
      const member = await outsiderClient.get(path);
      expect(member.status, path).toBe(403);
      expect(member.body).toEqual({
        error: { code: 'forbidden', message: 'Only administrators can do this.' },
      });
      expect((await request(t.app).get(path)).status, path).toBe(401);
      expect((await new TokenClient(t.app, token).get(path)).status, path).toBe(403);
    }
    const patch = await outsiderClient.patch(`/api/admin/users/${outsider.id}`, { role: 'admin' });
    expect(patch.status).toBe(403);
  });
});
