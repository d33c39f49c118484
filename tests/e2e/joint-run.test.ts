/**
 * A joint run in a real browser (tests/e2e/support/browser-app.ts: the built client, the real app, a separation
 * worker, Debian's Chromium at 1366 × 768): a sharp and a smooth image of the Lyra Deep Field (samples/joint-pair.ts,
 * the smooth one's fluxes 7 % high) are ticked in the image library, the joint-run form opens with both, the run
 * starts and finishes; its page shows the scale factors with errors and every image side by side, and fits the
 * laptop width in light and dark themes. A pair whose footprints do not overlap is refused on the form with the
 * engine's message. Screenshots go to test-artifacts/joint-run/. No console errors except the announced 422.
 */
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { simulateJointPair, type PairImage } from '../../samples/joint-pair';
import type { SimulatedSky } from '../../samples/sky-simulator';
import type { HeaderCard } from '../../server/engine/io/header-card';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { createUser, testPassword } from '../support/test-app';
import { storeImage } from '../server/runs/run-support';
import { type BrowserApp, overflowsHorizontally, signIn, startBrowserApp } from './support/browser-app';

let app: BrowserApp;
let page: Page;
let projectId = 0;
let email = '';

const pair = simulateJointPair({
  size: 64,
  seed: 5,
  sharp: { fwhmPx: 3, sigma: 1 },
  smooth: { fwhmFinePx: 9, sigma: 0.5, scaleError: 1.07 },
  diffuse: { level: 5, logStd: 0.5, slope: 4 },
  sources: { count: 6, minFlux: 8, maxFlux: 40, minSeparationPx: 10, marginPx: 8 },
});

function asSky(image: PairImage, edit: (cards: HeaderCard[]) => HeaderCard[] = (c) => c): SimulatedSky {
  return {
    width: image.width,
    height: image.height,
    image: Float32Array.from(image.image),
    header: edit(image.header.map((card) => ({ ...card }))),
  } as unknown as SimulatedSky;
}

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'joint-run', worker: true });
  page = app.page;
  const ctx = app.runtime.ctx;
  const owner = await createUser(ctx, { displayName: 'Ines Calder' });
  email = owner.email;
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field — two bands',
    description: '',
    ownerId: owner.id,
  });
  projectId = project.id;
  await Membership.query().insert([{ projectId, userId: owner.id, role: 'owner' }]);
  await storeImage(
    ctx,
    projectId,
    owner,
    asSky(pair.smooth, (cards) => cards.map((c) => (c.keyword === 'CRVAL2' ? { ...c, value: 48.8 } : c))),
    'ldf-elsewhere.fits',
  );
  await storeImage(ctx, projectId, owner, asSky(pair.sharp), 'ldf-sharp.fits');
  await storeImage(ctx, projectId, owner, asSky(pair.smooth), 'ldf-smooth.fits');
}, 240_000);

afterAll(async () => {
  await app?.close();
});

describe('a joint run in the browser', () => {
  it('ticks two images in the library, starts the joint run and reads its scale factors and residuals', async () => {
    await page.goto(`${app.url}/signin`);
    await signIn(page, email, testPassword);
    await page.goto(`${app.url}/projects/${projectId}/images`);
    await page.getByRole('checkbox', { name: 'Tick ldf-sharp.fits for a joint run' }).click();
    await page.getByRole('checkbox', { name: 'Tick ldf-smooth.fits for a joint run' }).click();
    await app.shot('01-library-ticked');
    await page.getByRole('link', { name: /Joint run \(2\)/ }).click();
    await page.waitForURL(/\/joint-runs\/new\?images=/);
    await expect.poll(() => page.getByTestId('joint-row-1').textContent()).toContain('ldf-sharp.fits');
    expect(await page.getByTestId('joint-row-2').textContent()).toContain('ldf-smooth.fits');
    await page.getByRole('spinbutton', { name: 'Iteration budget' }).fill('150');
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('02-joint-form');
    await page.getByRole('button', { name: 'Start joint run' }).click();
    await page.waitForURL(/\/runs\/\d+$/);
    await expect
      .poll(() => page.getByTestId('scale-row-2').textContent(), { timeout: 120_000, interval: 500 })
      .toMatch(/1\.0\d+ ± 0\.00\d+/);
    expect(await page.getByTestId('scale-row-1').textContent()).toContain('1 (fixed)');
    await page.getByTestId('joint-viewer-2').locator('canvas').first().waitFor({ timeout: 20_000 });
    expect(await page.getByTestId('joint-panel').locator('canvas').count()).toBeGreaterThanOrEqual(2);
    expect(await overflowsHorizontally(page)).toBe(false);
    await page.getByTestId('joint-panel').scrollIntoViewIfNeeded();
    await app.shot('03-joint-panel', { element: page.getByTestId('joint-panel') });
    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await app.shot('04-joint-panel-dark', { element: page.getByTestId('joint-panel') });
    await page.getByTestId('theme-toggle').first().click();
    expect(app.problems).toEqual([]);
  }, 240_000);

  it('shows the engine’s refusal on the form when the footprints do not overlap', async () => {
    const images = (await (await page.request.get(`${app.url}/api/projects/${projectId}/images`)).json()) as {
      id: number;
      name: string;
    }[];
    const id = (name: string) => images.find((image) => image.name === name)!.id;
    await page.goto(
      `${app.url}/projects/${projectId}/joint-runs/new?images=${id('ldf-sharp.fits')},${id('ldf-elsewhere.fits')}`,
    );
    await expect.poll(() => page.getByTestId('joint-row-2').textContent()).toContain('ldf-elsewhere.fits');
    app.expectRefusal(422, `/api/projects/${projectId}/joint-runs`);
    await page.getByRole('button', { name: 'Start joint run' }).click();
    await expect
      .poll(() => page.getByTestId('joint-issue').textContent())
      .toContain('image 2 (ldf-elsewhere.fits) does not overlap the footprint of the reference image');
    await app.shot('05-refused');
    expect(app.problems).toEqual([]);
  }, 60_000);
});
