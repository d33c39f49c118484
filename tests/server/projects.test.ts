// @vitest-environment node
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { projectDetailSchema, projectSummarySchema } from '../../shared/projects';
import { AuditEvent } from '../../server/models/audit-event';
import { Invitation } from '../../server/models/invitation';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import type { User } from '../../server/models/user';
import {
  apiError,
  type BrowserClient,
  createUser,
  mailTo,
  signIn,
  startTestApp,
  type TestApp,
} from '../support/test-app';

let t: TestApp;
let owner: User;
let ownerClient: BrowserClient;
beforeAll(async () => {
  t = await startTestApp();
  owner = await createUser(t.ctx, { displayName: 'Olga Owner' });
  ownerClient = await signIn(t.app, owner.email);
});
afterAll(async () => {
  await t.close();
});

async function newProject(name = 'Lyra north strip') {
  const response = await ownerClient.post('/api/projects', { name, description: '  Wide field, band 2  ' });
  expect(response.status).toBe(201);
  return projectSummarySchema.parse(response.body);
}

describe('projects', () => {
  it('creates a project: the creator is its owner, the input is trimmed, the creation is audited', async () => {
    const project = await newProject();
    expect(project).toMatchObject({
      name: 'Lyra north strip',
      description: 'Wide field, band 2',
      ownerId: owner.id,
      myRole: 'owner',
      memberCount: 1,
    });
    const detail = projectDetailSchema.parse((await ownerClient.get(`/api/projects/${project.id}`)).body);
    expect(detail.members).toEqual([
      { userId: owner.id, email: owner.email, displayName: 'Olga Owner', role: 'owner' },
    ]);
    expect(
      await AuditEvent.query().where({ action: 'project.created', targetId: project.id }).resultSize(),
    ).toBe(1);
  });
  it('rejects an empty name with the exact message', async () => {
    const response = await ownerClient.post('/api/projects', { name: '   ' });
    expect(response.status).toBe(400);
    expect(response.body.error.message).toBe('name: Enter a project name.');
  });
  it('renames and describes; unknown fields are refused', async () => {
    const project = await newProject();
    const response = await ownerClient.patch(`/api/projects/${project.id}`, {
      name: 'Lyra south strip',
      description: '',
    });
    expect(response.status).toBe(200);
    expect(response.body).toMatchObject({ name: 'Lyra south strip', description: '' });
    const bad = await ownerClient.patch(`/api/projects/${project.id}`, { ownerId: 5 });
    expect(bad.status).toBe(400);
    expect(bad.body.error.code).toBe('validation_failed');
  });
  it('deletes only with the exact name typed again', async () => {
    const project = await newProject('Deep strip 7');
    const wrong = await ownerClient.delete(`/api/projects/${project.id}`, { confirmName: 'deep strip 7' });
    expect(wrong.status).toBe(400);
    expect(wrong.body).toEqual(
      apiError('bad_request', 'Type the project name exactly to confirm the deletion.'),
    );
    expect(await Project.query().findById(project.id)).toBeDefined();
    const missing = await ownerClient.delete(`/api/projects/${project.id}`);
    expect(missing.status).toBe(400);
    const ok = await ownerClient.delete(`/api/projects/${project.id}`, { confirmName: 'Deep strip 7' });
    expect(ok.status).toBe(204);
    expect(await Project.query().findById(project.id)).toBeUndefined();
    expect(await Membership.query().where('projectId', project.id).resultSize()).toBe(0);
    const event = await AuditEvent.query().where({ action: 'project.deleted', targetId: project.id }).first();
    expect(event?.details).toEqual({ name: 'Deep strip 7' });
  });
});

describe('members and invitations', () => {
  it('adds an existing account (201) and e-mails it; a second add is 409', async () => {
    const project = await newProject('Members field');
    const colleague = await createUser(t.ctx, { email: 'Colleague.One@example.org', displayName: 'Col One' });
    const response = await ownerClient.post(`/api/projects/${project.id}/members`, {
      email: 'colleague.one@EXAMPLE.org',
      role: 'editor',
    });
    expect(response.status).toBe(201);
    expect(response.body).toEqual({
      member: {
        userId: colleague.id,
        email: 'Colleague.One@example.org',
        displayName: 'Col One',
        role: 'editor',
      },
    });
    const mails = await mailTo(t.ctx, 'colleague.one@example.org');
    expect(mails).toHaveLength(1);
    expect(mails[0]?.subject).toBe('You were added to the Skysieve project "Members field"');
    expect(mails[0]?.text).toContain(`http://skysieve.test/projects/${project.id}`);
    const again = await ownerClient.post(`/api/projects/${project.id}/members`, {
      email: colleague.email,
      role: 'viewer',
    });
    expect(again.status).toBe(409);
    expect(again.body).toEqual(apiError('conflict', 'That person is already a member of this project.'));
  });
  it('invites an unknown address (202) with an e-mailed sign-up link; lists and withdraws it', async () => {
    const project = await newProject('Invite field');
    const response = await ownerClient.post(`/api/projects/${project.id}/members`, {
      email: 'stranger@example.org',
      role: 'viewer',
    });
    expect(response.status).toBe(202);
    const invitation = response.body.invitation as {
      id: number;
      email: string;
      role: string;
      expiresAt: string;
    };
    expect(invitation).toMatchObject({
      email: 'stranger@example.org',
      role: 'viewer',
      projectId: project.id,
      invitedById: owner.id,
    });
    const days = (Date.parse(invitation.expiresAt) - Date.now()) / 86_400_000;
    expect(days).toBeGreaterThan(13.9);
    expect(days).toBeLessThanOrEqual(14);
    const [mail] = await mailTo(t.ctx, 'stranger@example.org');
    expect(mail?.subject).toBe('Olga Owner invited you to the Skysieve project "Invite field"');
    expect(mail?.text).toMatch(/http:\/\/skysieve\.test\/signup\?invitation=[A-Za-z0-9_-]{43}/);
    const twice = await ownerClient.post(`/api/projects/${project.id}/members`, {
      email: 'STRANGER@example.org',
      role: 'editor',
    });
    expect(twice.status).toBe(409);
    expect(twice.body).toEqual(
      apiError('conflict', 'An invitation to that address is already pending for this project.'),
    );
    const list = await ownerClient.get(`/api/projects/${project.id}/invitations`);
    expect(list.body).toEqual([expect.objectContaining({ id: invitation.id })]);
    expect(
      (await ownerClient.delete(`/api/projects/${project.id}/invitations/${invitation.id}`)).status,
    ).toBe(204);
    expect((await ownerClient.get(`/api/projects/${project.id}/invitations`)).body).toEqual([]);
    const gone = await ownerClient.delete(`/api/projects/${project.id}/invitations/${invitation.id}`);
    expect(gone.status).toBe(404);
    expect(gone.body).toEqual(apiError('not_found', 'No such invitation in this project.'));
  });
  it('keeps at least one owner: demoting, removing or leaving as the last owner is 409', async () => {
    const project = await newProject('Owner field');
    const base = `/api/projects/${project.id}/members/${owner.id}`;
    for (const response of [
      await ownerClient.patch(base, { role: 'editor' }),
      await ownerClient.delete(base),
      await ownerClient.post(`/api/projects/${project.id}/leave`),
    ]) {
      expect(response.status).toBe(409);
      expect(response.body).toEqual(
        apiError('conflict', 'A project needs at least one owner. Make someone else an owner first.'),
      );
    }
  });
  it('hands ownership over: a second owner lets the first leave, and ownerId follows', async () => {
    const project = await newProject('Hand-over field');
    const heir = await createUser(t.ctx);
    await ownerClient.post(`/api/projects/${project.id}/members`, { email: heir.email, role: 'editor' });
    const promoted = await ownerClient.patch(`/api/projects/${project.id}/members/${heir.id}`, {
      role: 'owner',
    });
    expect(promoted.status).toBe(200);
    expect(promoted.body.role).toBe('owner');
    expect((await ownerClient.post(`/api/projects/${project.id}/leave`)).status).toBe(204);
    expect((await Project.query().findById(project.id))?.ownerId).toBe(heir.id);
    expect((await ownerClient.get(`/api/projects/${project.id}`)).status).toBe(404);
    const events = await AuditEvent.query()
      .whereIn('action', ['member.role-changed', 'member.left'])
      .whereRaw("(details->>'projectId')::int = ?", [project.id]);
    expect(events.map((event) => event.action).sort()).toEqual(['member.left', 'member.role-changed']);
  });
  it('removes a member; the removed member loses access (404)', async () => {
    const project = await newProject('Removal field');
    const member = await createUser(t.ctx);
    await ownerClient.post(`/api/projects/${project.id}/members`, { email: member.email, role: 'viewer' });
    const memberClient = await signIn(t.app, member.email);
    await memberClient.get(`/api/projects/${project.id}`).expect(200);
    expect((await ownerClient.delete(`/api/projects/${project.id}/members/${member.id}`)).status).toBe(204);
    expect((await memberClient.get(`/api/projects/${project.id}`)).status).toBe(404);
    const again = await ownerClient.delete(`/api/projects/${project.id}/members/${member.id}`);
    expect(again.status).toBe(404);
    expect(again.body).toEqual(apiError('not_found', 'That person is not a member of this project.'));
  });
  it('validates the role of a new member (owners are made, not invited)', async () => {
    const project = await newProject('Role field');
    const response = await ownerClient.post(`/api/projects/${project.id}/members`, {
      email: 'x@example.org',
      role: 'owner',
    });
    expect(response.status).toBe(400);
    expect(response.body.error.details.issues[0].path).toEqual(['role']);
    expect(await Invitation.query().where('projectId', project.id).resultSize()).toBe(0);
  });
});
