/**
 * In a real browser (tests/e2e/support/browser-app.ts, with a separation worker): a finished run of a simulated
 * 96 × 96 Lyra Deep Field image shows its fit checks (Plotly really draws the residual spread, the log–log
 * spectrum and the flux distribution), its quick-look PNG link answers a PNG of the magnified size, and the
 * administrator's storage page lists the project with its owner, image and run. Light and dark screenshots at
 * 1366 × 768 go to test-artifacts/run-checks-and-storage/; no console errors, no horizontal scrolling.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { Image } from '../../server/models/image';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { Run } from '../../server/models/run';
import { createRun } from '../../server/runs/runs.service';
import { createUser } from '../support/test-app';
import { storeImage } from '../server/runs/run-support';
import {
  type BrowserApp,
  overflowsHorizontally,
  signIn,
  simulatedField,
  startBrowserApp,
} from './support/browser-app';

const owner = { email: 'lena.brandt@aws.example', displayName: 'Lena Brandt', password: 'lyra-checks-96' };
const admin = { email: 'store.keeper@aws.example', displayName: 'Store Keeper', password: 'admin-pass-789' };

let app: BrowserApp;
let runId = 0;
let sourceCount = 0;

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'run-checks-and-storage', worker: true });
  const ctx = app.runtime.ctx;
  const user = await createUser(ctx, { ...owner, role: 'member' });
  await createUser(ctx, { ...admin, role: 'admin' });
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field — checks',
    description: '',
    ownerId: user.id,
  });
  await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
  const { sky } = simulatedField(41);
  const imageId = await storeImage(ctx, project.id, user, sky, 'lyra-checks.fits');
  const image = (await Image.query().findById(imageId))!;
  const run = await createRun(ctx, user, image, {
    psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 },
    noiseSigma: 1e-4,
    maxIterations: 120,
  });
  runId = run.id;
  const started = Date.now();
  for (;;) {
    const state = (await Run.query().findById(runId))!;
    if (state.status === 'succeeded') {
      sourceCount = state.sourceCount ?? 0;
      break;
    }
    if (state.status === 'failed' || state.status === 'cancelled' || Date.now() - started > 150_000)
      throw new Error(`Run ${runId} ended as ${state.status}: ${state.errorMessage ?? ''}`);
    await new Promise((resolve) => setTimeout(resolve, 300));
  }
});

afterAll(async () => {
  await app?.close();
});

describe('fit checks, quick-look picture and storage in the browser', () => {
  it('draws the three fit checks of a finished run and serves its quick-look PNG', async () => {
    const page = app.page;
    await page.goto(`${app.url}/signin`);
    await signIn(page, owner.email, owner.password);
    await page.goto(`${app.url}/runs/${runId}`);
    const checks = page.getByTestId('fit-checks');
    await checks.waitFor();
    await checks.scrollIntoViewIfNeeded();
    // Plotly drew: an SVG with bars in the residual figure.
    await expect.poll(() => checks.locator('.main-svg').count()).toBeGreaterThan(0);
    await expect.poll(() => checks.locator('.bars path').count()).toBeGreaterThan(10);
    expect(await checks.getByTestId('residual-spread').textContent()).toMatch(/standard deviation \d/);
    await app.shot('01-residual-spread', { element: checks });

    await checks.getByRole('tab', { name: 'Diffuse spectrum' }).click();
    await expect.poll(() => checks.getByTestId('spectrum-law').textContent()).toMatch(/γ = \d/);
    await expect.poll(() => checks.locator('.scatterlayer .point').count()).toBeGreaterThan(1);
    await app.shot('02-diffuse-spectrum', { element: checks });

    await checks.getByRole('tab', { name: 'Flux distribution' }).click();
    await expect
      .poll(() => checks.getByTestId('flux-distribution').textContent())
      .toContain(`${sourceCount} sources`);
    await expect.poll(() => checks.locator('.bars path').count()).toBeGreaterThan(0);
    await app.shot('03-flux-distribution', { element: checks });
    expect(await overflowsHorizontally(page)).toBe(false);

    const link = page.getByRole('link', { name: /^Quick-look PNG/ });
    const href = (await link.getAttribute('href'))!;
    expect(href).toBe(`/api/runs/${runId}/quicklook.png?component=data`);
    const answer = await page.request.get(`${app.url}${href}`);
    expect(answer.status()).toBe(200);
    expect(answer.headers()['content-type']).toBe('image/png');
    const png = await answer.body();
    // IHDR (ISO/IEC 15948): width and height as big-endian 32-bit numbers at bytes 16 and 20.
    // 96 px is under half of the default 1024, so it is magnified 4×: 384 × 384.
    expect([png.readUInt32BE(16), png.readUInt32BE(20)]).toEqual([384, 384]);

    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await checks.getByRole('tab', { name: 'Residual spread' }).click();
    await app.shot('04-fit-checks-dark', { element: checks });
    await page.getByTestId('theme-toggle').first().click();
    expect(app.problems).toEqual([]);
  });

  it("lists the project's owner, image and run on the administrator's storage page", async () => {
    const page = await app.newPage();
    await page.goto(`${app.url}/signin`);
    await signIn(page, admin.email, admin.password);
    await page.getByRole('link', { name: 'Storage' }).click();
    await page.waitForURL(/\/admin\/storage$/);
    const projects = page.getByTestId('storage-projects');
    const row = projects.locator('tbody tr', { hasText: 'Lyra Deep Field — checks' });
    await row.waitFor();
    const cells = await row.locator('td').allTextContents();
    expect(cells[1]).toContain(owner.displayName);
    // Columns: project, owner, stored, images, image originals, runs, run results.
    expect(cells[3]?.trim()).toBe('1');
    expect(cells[5]?.trim()).toBe('1');
    const accounts = page.getByTestId('storage-accounts');
    await expect
      .poll(() => accounts.locator('tbody tr', { hasText: owner.displayName }).getByRole('meter').count())
      .toBe(1);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('05-admin-storage', { page });
    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await app.shot('06-admin-storage-dark', { page });
    expect(app.problems).toEqual([]);
  });
});
