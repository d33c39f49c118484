// @vitest-environment node
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { adminUserListSchema, auditPageSchema, devMailMessageSchema } from '../../shared/admin';
import { createToken } from '../../server/tokens/tokens.service';
import { AuditEvent } from '../../server/models/audit-event';
import type { User } from '../../server/models/user';
import {
  apiError,
  type BrowserClient,
  createUser,
  signIn,
  startTestApp,
  type TestApp,
  TokenClient,
} from '../support/test-app';

let t: TestApp;
let admin: User;
let adminClient: BrowserClient;
beforeAll(async () => {
  t = await startTestApp();
  admin = await createUser(t.ctx, { role: 'admin', email: 'chief@example.org' });
  adminClient = await signIn(t.app, admin.email);
});
afterAll(async () => {
  await t.close();
});

describe('admin: users', () => {
  it('lists every user with quota, usage and project count', async () => {
    const member = await createUser(t.ctx, { quotaBytes: 1234 });
    const memberClient = await signIn(t.app, member.email);
    await memberClient.post('/api/projects', { name: 'Counted' });
    const users = adminUserListSchema.parse((await adminClient.get('/api/admin/users').expect(200)).body);
    expect(users.find((user) => user.id === member.id)).toMatchObject({
      quotaBytes: 1234,
      bytesUsed: 0,
      projectCount: 1,
      role: 'member',
    });
    expect(users.find((user) => user.id === member.id)?.lastSignInAt).not.toBeNull();
  });
  it('changes role and quota, each audited with before and after', async () => {
    const member = await createUser(t.ctx, { quotaBytes: 1000 });
    const response = await adminClient.patch(`/api/admin/users/${member.id}`, {
      role: 'admin',
      quotaBytes: 2_000_000_000_000,
    });
    expect(response.status).toBe(200);
    expect(response.body).toMatchObject({ role: 'admin', quotaBytes: 2_000_000_000_000 });
    const events = await AuditEvent.query().where({ targetType: 'user', targetId: member.id }).orderBy('id');
    expect(events.map((event) => [event.action, event.actorId, event.details])).toEqual([
      ['user.role-changed', admin.id, { from: 'member', to: 'admin' }],
      ['user.quota-changed', admin.id, { from: 1000, to: 2_000_000_000_000 }],
    ]);
  });
  it('refuses negative or fractional quotas', async () => {
    const member = await createUser(t.ctx);
    const negative = await adminClient.patch(`/api/admin/users/${member.id}`, { quotaBytes: -1 });
    expect(negative.status).toBe(400);
    expect(negative.body.error.message).toBe('quotaBytes: The quota cannot be negative.');
    const fraction = await adminClient.patch(`/api/admin/users/${member.id}`, { quotaBytes: 1.5 });
    expect(fraction.body.error.message).toBe('quotaBytes: The quota must be a whole number of bytes.');
  });
  it('does not let an admin demote or disable themself', async () => {
    const demote = await adminClient.patch(`/api/admin/users/${admin.id}`, { role: 'member' });
    expect(demote.status).toBe(400);
    expect(demote.body).toEqual(
      apiError('bad_request', 'You cannot remove your own administrator role. Ask another administrator.'),
    );
    const disable = await adminClient.patch(`/api/admin/users/${admin.id}`, { disabled: true });
    expect(disable.status).toBe(400);
    expect(disable.body).toEqual(apiError('bad_request', 'You cannot disable your own account.'));
  });
  it('disabling a user ends their live sessions and refuses their tokens; enabling lets them back', async () => {
    const member = await createUser(t.ctx);
    const memberClient = await signIn(t.app, member.email);
    const { token } = await createToken(member, 'script', null);
    await memberClient.get('/api/auth/me').expect(200);
    const off = await adminClient.patch(`/api/admin/users/${member.id}`, { disabled: true });
    expect(off.status).toBe(200);
    expect(off.body.disabled).toBe(true);
    expect((await memberClient.get('/api/auth/me')).status).toBe(401);
    expect((await new TokenClient(t.app, token).get('/api/projects')).status).toBe(401);
    const on = await adminClient.patch(`/api/admin/users/${member.id}`, { disabled: false });
    expect(on.body.disabled).toBe(false);
    await signIn(t.app, member.email);
    expect((await new TokenClient(t.app, token).get('/api/projects')).status).toBe(200);
    const actions = (
      await AuditEvent.query().where({ targetId: member.id, targetType: 'user' }).orderBy('id')
    ).map((e) => e.action);
    expect(actions).toEqual(expect.arrayContaining(['user.disabled', 'user.enabled']));
  });
  it('answers 404 for an unknown user', async () => {
    const response = await adminClient.patch('/api/admin/users/999999', { quotaBytes: 1 });
    expect(response.status).toBe(404);
    expect(response.body).toEqual(apiError('not_found', 'No such user.'));
  });
});

describe('admin: audit log', () => {
  it('filters by action, actor and target type, newest first, paged, with actor e-mail and IP', async () => {
    const member = await createUser(t.ctx, { email: 'audited@example.org' });
    const memberClient = await signIn(t.app, member.email);
    for (const name of ['One', 'Two', 'Three']) await memberClient.post('/api/projects', { name });
    const page1 = auditPageSchema.parse(
      (
        await adminClient
          .get(`/api/admin/audit?action=project.created&actorId=${member.id}&pageSize=2`)
          .expect(200)
      ).body,
    );
    expect(page1.total).toBe(3);
    expect(page1.items.map((event) => event.details.name)).toEqual(['Three', 'Two']);
    expect(page1.items[0]).toMatchObject({ actorEmail: 'audited@example.org', targetType: 'project' });
    expect(page1.items[0]?.ip).toMatch(/127\.0\.0\.1/);
    const page2 = auditPageSchema.parse(
      (
        await adminClient.get(
          `/api/admin/audit?action=project.created&actorId=${member.id}&pageSize=2&page=2`,
        )
      ).body,
    );
    expect(page2.items.map((event) => event.details.name)).toEqual(['One']);
    const byType = auditPageSchema.parse(
      (await adminClient.get(`/api/admin/audit?targetType=user&actorId=${member.id}`)).body,
    );
    expect(byType.items.every((event) => event.targetType === 'user')).toBe(true);
    expect(byType.items.map((event) => event.action)).toContain('auth.sign-in');
  });
  it('rejects an unknown action filter', async () => {
    const response = await adminClient.get('/api/admin/audit?action=made.up');
    expect(response.status).toBe(400);
    expect(response.body.error.details.issues[0].path).toEqual(['action']);
  });
});

describe('admin: development mail inbox', () => {
  it('lists caught messages newest first and shows one with text and HTML', async () => {
    const user = await createUser(t.ctx, { email: 'inbox-reader@example.org' });
    await (await signIn(t.app, admin.email)).post('/api/auth/password-reset/request', { email: user.email });
    await t.ctx.mailer.idle();
    const list = (await adminClient.get('/api/admin/mail').expect(200)).body as {
      id: number;
      to: string;
      subject: string;
    }[];
    const summary = list.find((message) => message.to.includes('inbox-reader@example.org'));
    expect(summary?.subject).toBe('Reset your Skysieve password');
    const message = devMailMessageSchema.parse(
      (await adminClient.get(`/api/admin/mail/${summary?.id}`).expect(200)).body,
    );
    expect(message.from).toBe('Skysieve <no-reply@skysieve.invalid>');
    expect(message.text).toContain('The link below works once and expires in 60 minutes.');
    expect(message.html).toContain('<a href="http://skysieve.test/reset/');
    const missing = await adminClient.get('/api/admin/mail/999999');
    expect(missing.status).toBe(404);
    expect(missing.body).toEqual(apiError('not_found', 'No such message.'));
  });
});
