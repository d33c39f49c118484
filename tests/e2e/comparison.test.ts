/**
 * The comparison journey in a real browser (tests/e2e/support/browser-app.ts: the built client, the real app, a
 * separation worker, Debian's Chromium at 1366 × 768): two runs of a small simulated Lyra Deep Field image with
 * different detection thresholds and compact-source caution finish; an editor opens the image in the library,
 * chooses both runs and presses Compare; the comparison page shows the settings that differ, a panel per run, the
 * diffuse difference and the cross-match with its flux–flux plot, and fits the laptop width in light and dark
 * themes; its link opens for a project viewer (signed out first: sign-in leads back to it) but not for someone
 * outside the project. Screenshots go to test-artifacts/comparison/. No console errors except the announced 404
 * of the outsider. */
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { createUser, testPassword } from '../support/test-app';
import { storeImage } from '../server/runs/run-support';
import {
  type BrowserApp,
  overflowsHorizontally,
  signIn,
  simulatedField,
  startBrowserApp,
} from './support/browser-app';

let app: BrowserApp;
let page: Page;
let projectId = 0;
const people = { editor: '', viewer: '', outsider: '' };

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'comparison', worker: true });
  page = app.page;
  const ctx = app.runtime.ctx;
  const [editor, viewer, outsider] = await Promise.all([
    createUser(ctx, { displayName: 'Ines Calder' }),
    createUser(ctx, { displayName: 'Oskar Brandt' }),
    createUser(ctx, { displayName: 'Mara Quist' }),
  ]);
  people.editor = editor.email;
  people.viewer = viewer.email;
  people.outsider = outsider.email;
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field — tile 7',
    description: '',
    ownerId: editor.id,
  });
  projectId = project.id;
  await Membership.query().insert([
    { projectId, userId: editor.id, role: 'owner' },
    { projectId, userId: viewer.id, role: 'viewer' },
  ]);
  await storeImage(ctx, projectId, editor, simulatedField(31, 64).sky, 'ldf-tile7.fits');
}, 240_000);

afterAll(async () => {
  await app?.close();
});

/** Starts a run through the API with the page's session and waits until it has finished. */
async function finishedRun(imageId: number, settings: object): Promise<number> {
  const csrf = (await (await page.request.get(`${app.url}/api/auth/csrf`)).json()) as { token: string };
  const started = await page.request.post(`${app.url}/api/images/${imageId}/runs`, {
    data: { settings },
    headers: { 'x-csrf-token': csrf.token },
  });
  expect(started.status()).toBe(202);
  const { id } = (await started.json()) as { id: number };
  await expect
    .poll(
      async () =>
        ((await (await page.request.get(`${app.url}/api/runs/${id}`)).json()) as { status: string }).status,
      {
        timeout: 90_000,
        interval: 500,
      },
    )
    .toBe('succeeded');
  return id;
}

describe('comparing two runs in the browser', () => {
  let comparisonUrl = '';

  it('chooses two finished runs in the image library and opens their comparison', async () => {
    await page.goto(`${app.url}/signin`);
    await signIn(page, people.editor, testPassword);
    const images = (await (await page.request.get(`${app.url}/api/projects/${projectId}/images`)).json()) as {
      id: number;
    }[];
    const imageId = images[0]!.id;
    const fast = { psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 }, noiseSigma: 1e-4, maxIterations: 120 };
    const first = await finishedRun(imageId, fast);
    const second = await finishedRun(imageId, { ...fast, threshold: 8, compactAlpha: 2.5 });

    await page.goto(`${app.url}/projects/${projectId}/images`);
    await page.getByRole('link', { name: 'ldf-tile7.fits', exact: true }).click();
    await page.getByText('Compare runs', { exact: true }).click();
    await page.getByRole('checkbox', { name: `Compare run ${first}` }).click();
    await page.getByRole('checkbox', { name: `Compare run ${second}` }).click();
    await page.getByRole('textbox', { name: 'Comparison name' }).fill('Threshold 5 against 8');
    await app.shot('01-choose-runs');
    await page.getByRole('button', { name: 'Compare', exact: true }).click();
    await page.waitForURL(/\/comparisons\/\d+$/);
    comparisonUrl = page.url();

    await expect.poll(() => page.getByTestId('comparison-name').textContent()).toBe('Threshold 5 against 8');
    await expect
      .poll(() => page.getByTestId('setting-threshold').textContent())
      .toContain('Detection threshold');
    await expect
      .poll(() => page.getByTestId('cross-match-summary').textContent(), { timeout: 20_000 })
      .toContain('Matched');
    await page.getByTestId('flux-scatter').locator('.main-svg').first().waitFor({ timeout: 20_000 });
    expect(await page.locator('canvas').count()).toBeGreaterThanOrEqual(3);
    // compactAlpha differs too, so the fit (not only the catalogue) differs: the difference is not zero.
    await expect
      .poll(() => page.getByTestId('difference-note').textContent())
      .toContain('Largest |difference|');
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('02-comparison');
    await page.getByTestId('difference-panel').scrollIntoViewIfNeeded();
    await app.shot('02b-difference-and-cross-match', {
      element: page.locator('section[aria-labelledby="pair-title"]'),
    });

    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await app.shot('03-comparison-dark');
    await page.getByTestId('theme-toggle').first().click();
    expect(app.problems).toEqual([]);
  }, 240_000);

  it('opens for a project viewer through its link (after signing in), and is "not found" for anyone else', async () => {
    // Signed out, the link leads to sign-in and back to the comparison.
    const viewerPage = await app.newPage();
    await viewerPage.goto(comparisonUrl);
    await viewerPage.waitForURL(/\/signin\?redirect=/);
    await viewerPage.getByRole('textbox', { name: 'E-mail address', exact: true }).fill(people.viewer);
    await viewerPage.getByRole('textbox', { name: 'Password', exact: true }).fill(testPassword);
    await viewerPage.getByRole('button', { name: 'Sign in' }).click();
    await viewerPage.waitForURL(comparisonUrl);
    await expect
      .poll(() => viewerPage.getByTestId('comparison-name').textContent())
      .toBe('Threshold 5 against 8');
    expect(await viewerPage.getByTestId('comparison-rename').count()).toBe(0);

    const outsiderPage = await app.newPage();
    await outsiderPage.goto(`${app.url}/signin`);
    await signIn(outsiderPage, people.outsider, testPassword);
    app.expectRefusal(404, new URL(comparisonUrl).pathname.replace('/comparisons/', '/api/comparisons/'));
    await outsiderPage.goto(comparisonUrl);
    await expect
      .poll(() => outsiderPage.getByRole('alert').first().textContent())
      .toContain('Comparison not found.');
    await app.shot('04-outsider', { page: outsiderPage });
    expect(app.problems).toEqual([]);
  }, 120_000);
});
