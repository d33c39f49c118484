// @vitest-environment node
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { Invitation } from '../../server/models/invitation';
import type { User } from '../../server/models/user';
import { BrowserClient, createUser, mailTo, signIn, startTestApp, type TestApp } from '../support/test-app';

let t: TestApp;
let closed: TestApp;
let owner: User;
let ownerClient: BrowserClient;
beforeAll(async () => {
  t = await startTestApp();
  closed = await startTestApp({ registrationOpen: false }, t.db);
  owner = await createUser(t.ctx, { displayName: 'Ines Inviter' });
  ownerClient = await signIn(t.app, owner.email);
});
afterAll(async () => {
  await closed.close();
  await t.close();
});

async function inviteTo(
  projectName: string,
  email: string,
  role: 'viewer' | 'editor',
): Promise<{ projectId: number; token: string }> {
  const project = (await ownerClient.post('/api/projects', { name: projectName })).body as { id: number };
  const response = await ownerClient.post(`/api/projects/${project.id}/members`, { email, role });
  expect(response.status).toBe(202);
  const mails = await mailTo(t.ctx, email);
  const last = mails.at(-1);
  const token = /invitation=([A-Za-z0-9_-]+)/.exec(last?.text ?? '')?.[1];
  if (!token) throw new Error(`No invitation link in the mail to ${email}: ${last?.text}`);
  return { projectId: project.id, token };
}

describe('invitations of addresses without an account', () => {
  it('joins every invited project on sign-up (open registration, no token needed)', async () => {
    const a = await inviteTo('Invited A', 'newcomer@example.org', 'viewer');
    const b = await inviteTo('Invited B', 'newcomer@example.org', 'editor');
    const client = new BrowserClient(t.app);
    const signup = await client.post('/api/auth/signup', {
      email: 'NewComer@example.org',
      displayName: 'New Comer',
      password: 'a-long-enough-password',
    });
    expect(signup.status).toBe(201);
    const projects = (await client.get('/api/projects')).body as { id: number; myRole: string }[];
    expect(projects.map((p) => [p.id, p.myRole]).sort()).toEqual(
      [
        [a.projectId, 'viewer'],
        [b.projectId, 'editor'],
      ].sort(),
    );
    const invitations = await Invitation.query().whereIn('projectId', [a.projectId, b.projectId]);
    expect(invitations.every((invitation) => invitation.acceptedAt instanceof Date)).toBe(true);
    expect((await ownerClient.get(`/api/projects/${a.projectId}/invitations`)).body).toEqual([]);
  });
  it('shows what an invitation link invites to, and 404 for an unknown token', async () => {
    const { token } = await inviteTo('Preview field', 'preview@example.org', 'editor');
    const response = await request(t.app).get(`/api/auth/invitations/${token}`).expect(200);
    expect(response.body).toMatchObject({
      email: 'preview@example.org',
      projectName: 'Preview field',
      invitedBy: 'Ines Inviter',
      role: 'editor',
    });
    const unknown = await request(t.app).get('/api/auth/invitations/not-a-token');
    expect(unknown.status).toBe(404);
    expect(unknown.body).toEqual({
      error: { code: 'not_found', message: 'This invitation is not valid any more.' },
    });
  });
  it('with registration closed, lets exactly the invited address sign up with its token', async () => {
    const { projectId, token } = await inviteTo('Closed field', 'closed-invitee@example.org', 'viewer');
    const otherAddress = await new BrowserClient(closed.app).post('/api/auth/signup', {
      email: 'someone-else@example.org',
      displayName: 'Someone',
      password: 'a-long-enough-password',
      invitation: token,
    });
    expect(otherAddress.status).toBe(403);
    const client = new BrowserClient(closed.app);
    const response = await client.post('/api/auth/signup', {
      email: 'closed-invitee@example.org',
      displayName: 'Invitee',
      password: 'a-long-enough-password',
      invitation: token,
    });
    expect(response.status).toBe(201);
    expect((await client.get(`/api/projects/${projectId}`)).status).toBe(200);
    expect((await request(closed.app).get('/api/config/public')).body.registrationOpen).toBe(false);
  });
  it('ignores expired invitations on sign-up', async () => {
    const { projectId } = await inviteTo('Expired field', 'late@example.org', 'viewer');
    await Invitation.query()
      .patch({ expiresAt: new Date(Date.now() - 1000) })
      .where('projectId', projectId);
    const client = new BrowserClient(t.app);
    await client.post('/api/auth/signup', {
      email: 'late@example.org',
      displayName: 'Late',
      password: 'a-long-enough-password',
    });
    expect((await client.get(`/api/projects/${projectId}`)).status).toBe(404);
  });
});
