// @vitest-environment node
/**
 * Issue 5: uploads never leave anything behind. The temporary file is removed after every outcome (stored,
 * refused by the reader, too large, duplicate), and a client that disconnects in the middle of its upload leaves
 * no image row, no quota charge and no temporary file.
 */
import { readdirSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { connect } from 'node:net';
import { tmpdir } from 'node:os';

import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { uploadFilePrefix } from '../../../server/images/receive-upload';
import { Image } from '../../../server/models/image';
import { Membership } from '../../../server/models/membership';
import { Project } from '../../../server/models/project';
import { User } from '../../../server/models/user';
import { createToken } from '../../../server/tokens/tokens.service';
import { createUser, startTestApp, type TestApp } from '../../support/test-app';
import { fitsFile, noisePlane, uploadWithToken } from './image-files';

let t: TestApp;
let small: TestApp;
let user: User;
let token: string;
let project: Project;
let server: Server;

beforeAll(async () => {
  t = await startTestApp();
  small = await startTestApp({ uploadMaxBytes: 50_000 }, t.db);
  user = await createUser(t.ctx, { quotaBytes: 1_000_000 });
  token = (await createToken(user, 'uploads', null)).token;
  project = await Project.query().insertAndFetch({ name: 'Leftovers', description: '', ownerId: user.id });
  await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
  server = createServer(t.app);
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
});
afterAll(async () => {
  await new Promise((resolve) => server?.close(resolve));
  await small?.close();
  await t?.close();
});

const leftovers = () => readdirSync(tmpdir()).filter((name) => name.startsWith(uploadFilePrefix()));

/** Waits until the upload folder is empty (removal happens when the response closes), at most 3 s. */
async function expectNoLeftovers(): Promise<void> {
  for (let i = 0; i < 60 && leftovers().length > 0; i++)
    await new Promise((resolve) => setTimeout(resolve, 50));
  expect(leftovers()).toEqual([]);
}

describe('temporary upload files', () => {
  it('are removed after a stored upload, a refused one, a duplicate and a too-large one', async () => {
    const bytes = fitsFile(noisePlane(40, 32, 1));
    expect((await uploadWithToken(t.app, token, project.id, bytes, 'a.fits')).status).toBe(201);
    await expectNoLeftovers();
    expect((await uploadWithToken(t.app, token, project.id, bytes, 'a.fits')).status).toBe(409);
    await expectNoLeftovers();
    expect(
      (await uploadWithToken(t.app, token, project.id, bytes.subarray(0, 3000), 'cut.fits')).status,
    ).toBe(422);
    await expectNoLeftovers();
    expect(
      (await uploadWithToken(small.app, token, project.id, Buffer.alloc(80_000, 1), 'big.fits')).status,
    ).toBe(413);
    await expectNoLeftovers();
  });

  it('a client that disconnects mid-upload leaves no row, no charge and no file', async () => {
    const before = (await User.query().findById(user.id))!.bytesUsed;
    const images = await Image.query().where('projectId', project.id).resultSize();
    const { port } = server.address() as AddressInfo;
    const boundary = 'skysieve-test-boundary';
    const file = fitsFile(noisePlane(200, 200, 2));
    const head = Buffer.from(
      `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="gone.fits"\r\n` +
        'Content-Type: application/octet-stream\r\n\r\n',
    );
    const tail = Buffer.from(`\r\n--${boundary}--\r\n`);
    const socket = connect(port, '127.0.0.1');
    await new Promise<void>((resolve) => socket.once('connect', resolve));
    socket.write(
      `POST /api/projects/${project.id}/images HTTP/1.1\r\nHost: 127.0.0.1\r\n` +
        `Authorization: Bearer ${token}\r\nContent-Type: multipart/form-data; boundary=${boundary}\r\n` +
        `Content-Length: ${head.length + file.length + tail.length}\r\n\r\n`,
    );
    socket.write(head);
    socket.write(file.subarray(0, file.length / 2));
    // Let the server start writing the temporary file, then go away.
    for (let i = 0; i < 40 && leftovers().length === 0; i++)
      await new Promise((resolve) => setTimeout(resolve, 25));
    expect(leftovers().length).toBe(1);
    socket.destroy();
    await expectNoLeftovers();
    expect(await Image.query().where('projectId', project.id).resultSize()).toBe(images);
    expect((await User.query().findById(user.id))!.bytesUsed).toBe(before);
  });
});
