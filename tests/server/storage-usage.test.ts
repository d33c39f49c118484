// @vitest-environment node
/**
 * GET /api/admin/storage per project: the owner, the images and the run results, each summed on its own (a
 * project with two images and three runs must not count either six times), largest project first; admins only.
 */
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { storageUsageSchema } from '../../shared/images';
import { Project } from '../../server/models/project';
import { Run } from '../../server/models/run';
import { apiError, createUser, signIn, startTestApp, type TestApp } from '../support/test-app';
import { runFixture, smallSky, storeImage } from './runs/run-support';

let t: TestApp;
beforeAll(async () => {
  t = await startTestApp();
});
afterAll(async () => {
  await t.close();
});

async function insertRun(projectId: number, imageId: number, createdBy: number, resultBytes: number) {
  await Run.query().insert({
    imageId,
    projectId,
    createdBy,
    status: 'succeeded',
    requestedSettings: {},
    settings: {},
    settingsDigest: 'c'.repeat(64),
    attempts: 1,
    cancelRequested: false,
    resultBytes,
    finishedAt: new Date(),
  });
}

describe('storage per project', () => {
  it('gives the owner, images and run results of each project, largest first', async () => {
    const f = await runFixture(t.ctx);
    const second = await storeImage(t.ctx, f.project.id, f.owner, smallSky(12), 'lyra-second.fits');
    for (const bytes of [10_000, 20_000, 30_000]) await insertRun(f.project.id, f.imageId, f.owner.id, bytes);
    const images = (await t.ctx.knex('images').whereIn('id', [f.imageId, second]).select('file_bytes')) as {
      fileBytes: number;
    }[];
    const imageBytes = images.reduce((sum, row) => sum + Number(row.fileBytes), 0);
    const emptyOwner = await createUser(t.ctx);
    const empty = await Project.query().insertAndFetch({
      name: 'Empty field',
      description: '',
      ownerId: emptyOwner.id,
    });

    const admin = await createUser(t.ctx, { role: 'admin' });
    const client = await signIn(t.app, admin.email);
    const response = await client.get('/api/admin/storage').expect(200);
    const usage = storageUsageSchema.parse(response.body);
    const row = usage.projects.find((p) => p.projectId === f.project.id);
    expect(row).toEqual({
      projectId: f.project.id,
      name: 'Lyra Deep Field',
      ownerId: f.owner.id,
      ownerEmail: f.owner.email,
      ownerName: f.owner.displayName,
      imageCount: 2,
      imageBytes,
      runCount: 3,
      runBytes: 60_000,
    });
    expect(usage.projects.find((p) => p.projectId === empty.id)).toMatchObject({
      imageCount: 0,
      imageBytes: 0,
      runCount: 0,
      runBytes: 0,
    });
    const totals = usage.projects.map((p) => p.imageBytes + p.runBytes);
    expect(totals).toEqual([...totals].sort((a, b) => b - a));
  });

  it('shows a project whose owner account is gone without an owner', async () => {
    const owner = await createUser(t.ctx);
    const project = await Project.query().insertAndFetch({
      name: 'Orphan',
      description: '',
      ownerId: owner.id,
    });
    await t.ctx.knex('users').where('id', owner.id).delete();
    const admin = await createUser(t.ctx, { role: 'admin' });
    const client = await signIn(t.app, admin.email);
    const usage = storageUsageSchema.parse((await client.get('/api/admin/storage').expect(200)).body);
    expect(usage.projects.find((p) => p.projectId === project.id)).toMatchObject({
      ownerId: null,
      ownerEmail: null,
      ownerName: null,
    });
  });

  it('is for administrators only', async () => {
    const member = await createUser(t.ctx);
    const client = await signIn(t.app, member.email);
    const refused = await client.get('/api/admin/storage');
    expect(refused.status).toBe(403);
    expect(refused.body).toEqual(apiError('forbidden', 'Only administrators can do this.'));
    const anonymous = await request(t.app).get('/api/admin/storage');
    expect(anonymous.status).toBe(401);
  });
});
