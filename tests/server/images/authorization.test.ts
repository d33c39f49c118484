// @vitest-environment node
/**
 * Issue 5, authorization matrix for images: admin (not a member), owner, editor, viewer, signed-in non-member,
 * signed-out, and a Bearer token of the owner, on every image route. By the project rules: a project the caller
 * cannot see answers 404 (never 403); visible but not allowed answers 403. Each case gets a fresh project and image.
 */
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { uploadImage } from '../../../server/images/images.service';
import { Image } from '../../../server/models/image';
import { Membership } from '../../../server/models/membership';
import { Project } from '../../../server/models/project';
import { User } from '../../../server/models/user';
import { createToken } from '../../../server/tokens/tokens.service';
import { type Actor, actors, editorsStatuses, readStatuses } from '../../support/authorization-actors';
import { BrowserClient, createUser, signIn, startTestApp, type TestApp } from '../../support/test-app';
import { binary, fitsFile, noisePlane } from './image-files';

let t: TestApp;
let adminClient: BrowserClient;
let outsiderClient: BrowserClient;
beforeAll(async () => {
  t = await startTestApp();
  const admin = await createUser(t.ctx, { role: 'admin' });
  const outsider = await createUser(t.ctx);
  adminClient = await signIn(t.app, admin.email);
  outsiderClient = await signIn(t.app, outsider.email);
});
afterAll(async () => {
  await t?.close();
});

interface Fixture {
  project: Project;
  owner: User;
  editor: User;
  viewer: User;
  imageId: number;
  fileBytes: number;
}

let seed = 1000;
async function fixture(): Promise<Fixture> {
  const [owner, editor, viewer] = await Promise.all([
    createUser(t.ctx),
    createUser(t.ctx),
    createUser(t.ctx),
  ]);
  const project = await Project.query().insertAndFetch({
    name: 'Matrix field',
    description: '',
    ownerId: owner!.id,
  });
  await Membership.query().insert([
    { projectId: project.id, userId: owner!.id, role: 'owner' },
    { projectId: project.id, userId: editor!.id, role: 'editor' },
    { projectId: project.id, userId: viewer!.id, role: 'viewer' },
  ]);
  const image = await uploadImage(
    owner!,
    project.id,
    { path: '', bytes: fitsFile(noisePlane(32, 24, seed++)), originalName: 'matrix.fits' },
    { maxPixels: t.ctx.config.maxImagePixels },
  );
  return {
    project,
    owner: owner!,
    editor: editor!,
    viewer: viewer!,
    imageId: image.id,
    fileBytes: image.fileBytes,
  };
}

/** One way of calling the API per actor: a browser session (cookies + CSRF) or a Bearer token. */
interface Caller {
  get(path: string): request.Test;
  send(method: 'patch' | 'delete', path: string, body?: object): Promise<request.Response>;
  upload(path: string, bytes: Buffer, name: string): Promise<request.Response>;
}

function browserCaller(client: BrowserClient): Caller {
  return {
    get: (path) => client.get(path),
    send: (method, path, body) => (method === 'patch' ? client.patch(path, body) : client.delete(path, body)),
    async upload(path, bytes, name) {
      const token = await client.csrfToken();
      return client.agent.post(path).set('x-csrf-token', token).attach('file', bytes, name);
    },
  };
}

function tokenCaller(token: string): Caller {
  const auth = `Bearer ${token}`;
  return {
    get: (path) => request(t.app).get(path).set('authorization', auth),
    send: async (method, path, body) =>
      request(t.app)
        [method](path)
        .set('authorization', auth)
        .send(body ?? {}),
    upload: async (path, bytes, name) =>
      request(t.app).post(path).set('authorization', auth).attach('file', bytes, name),
  };
}

async function callerFor(actor: Actor, f: Fixture): Promise<Caller> {
  switch (actor) {
    case 'admin':
      return browserCaller(adminClient);
    case 'non-member':
      return browserCaller(outsiderClient);
    case 'owner':
      return browserCaller(await signIn(t.app, f.owner.email));
    case 'editor':
      return browserCaller(await signIn(t.app, f.editor.email));
    case 'viewer':
      return browserCaller(await signIn(t.app, f.viewer.email));
    case 'signed-out':
      return browserCaller(new BrowserClient(t.app));
    case 'owner token':
      return tokenCaller((await createToken(f.owner, 'matrix', null)).token);
  }
}

interface Action {
  name: string;
  call(caller: Caller, f: Fixture): PromiseLike<request.Response>;
  expected: Record<Actor, number>;
  verify?(f: Fixture, allowed: boolean): Promise<void>;
}

const actions: Action[] = [
  {
    name: 'list images',
    call: (c, f) => c.get(`/api/projects/${f.project.id}/images`),
    expected: readStatuses,
  },
  { name: 'image detail', call: (c, f) => c.get(`/api/images/${f.imageId}`), expected: readStatuses },
  {
    name: 'thumbnail',
    call: (c, f) => c.get(`/api/images/${f.imageId}/thumbnail`).buffer(true).parse(binary),
    expected: readStatuses,
  },
  {
    name: 'original',
    call: (c, f) => c.get(`/api/images/${f.imageId}/original`).buffer(true).parse(binary),
    expected: readStatuses,
  },
  {
    name: 'pixel view',
    call: (c, f) => c.get(`/api/images/${f.imageId}/pixels?maxSize=16`).buffer(true).parse(binary),
    expected: readStatuses,
  },
  {
    name: 'rename image',
    call: (c, f) => c.send('patch', `/api/images/${f.imageId}`, { name: 'Renamed' }),
    expected: editorsStatuses(200),
    async verify(f, allowed) {
      expect((await Image.query().findById(f.imageId))?.name).toBe(allowed ? 'Renamed' : 'matrix.fits');
    },
  },
  {
    name: 'delete image',
    call: (c, f) => c.send('delete', `/api/images/${f.imageId}`),
    expected: editorsStatuses(204),
    async verify(f, allowed) {
      expect(Boolean(await Image.query().findById(f.imageId))).toBe(!allowed);
      // The owner uploaded it: the owner's counter is released only when the image is gone.
      const bytesUsed = (await User.query().findById(f.owner.id))!.bytesUsed;
      expect(bytesUsed).toBe(allowed ? 0 : f.fileBytes);
    },
  },
  {
    name: 'upload image',
    call: (c, f) =>
      c.upload(`/api/projects/${f.project.id}/images`, fitsFile(noisePlane(32, 24, seed++)), 'new.fits'),
    expected: editorsStatuses(201),
    async verify(f, allowed) {
      expect(await Image.query().where('projectId', f.project.id).resultSize()).toBe(allowed ? 2 : 1);
    },
  },
];

describe('image routes by role', () => {
  for (const action of actions) {
    for (const actor of actors) {
      const status = action.expected[actor];
      it(`${action.name} as ${actor} → ${status}`, async () => {
        const f = await fixture();
        const caller = await callerFor(actor, f);
        const response = await action.call(caller, f);
        expect(
          response.status,
          JSON.stringify(response.body instanceof Buffer ? '<binary>' : response.body),
        ).toBe(status);
        if (status === 404) {
          expect(response.body).toEqual({
            error: {
              code: 'not_found',
              message:
                action.name === 'list images' || action.name === 'upload image'
                  ? 'Project not found.'
                  : 'Image not found.',
            },
          });
        }
        if (status === 401)
          expect(response.body).toEqual({
            error: { code: 'unauthenticated', message: 'Sign in to continue.' },
          });
        if (status === 403) {
          expect(response.body).toEqual({
            error: { code: 'forbidden', message: 'Only project owners and editors can do this.' },
          });
        }
        await action.verify?.(f, status < 300);
      });
    }
  }
});
