/**
 * In a real browser (tests/e2e/support/browser-app.ts, with a separation worker and an injection-trial worker):
 * from a finished run of a simulated 96 × 96 Lyra Deep Field image, the Completeness button leads to the page,
 * the setup form starts a study, the trials run, and Plotly really draws completeness, flux bias and the number
 * counts; the caution is on screen. Light and dark screenshots at 1366 × 768 go to test-artifacts/completeness/;
 * no console errors, no horizontal scrolling.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { Image } from '../../server/models/image';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { Run } from '../../server/models/run';
import { startInjectionWorker } from '../../server/queue/injection-worker';
import type { RunWorker } from '../../server/queue/run-worker';
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

const owner = { email: 'mira.okafor@aws.example', displayName: 'Mira Okafor', password: 'lyra-injection-96' };

let app: BrowserApp;
let injectionWorker: RunWorker | undefined;
let runId = 0;

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'completeness', worker: true });
  const ctx = app.runtime.ctx;
  injectionWorker = await startInjectionWorker(ctx, { pollingIntervalSeconds: 0.5 });
  const user = await createUser(ctx, { ...owner, role: 'member' });
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field — completeness',
    description: '',
    ownerId: user.id,
  });
  await Membership.query().insert({ projectId: project.id, userId: user.id, role: 'owner' });
  const { sky } = simulatedField(57);
  const imageId = await storeImage(ctx, project.id, user, sky, 'lyra-completeness.fits');
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
    if (state.status === 'succeeded') break;
    if (state.status === 'failed' || state.status === 'cancelled' || Date.now() - started > 150_000)
      throw new Error(`Run ${runId} ended as ${state.status}: ${state.errorMessage ?? ''}`);
    await new Promise((resolve) => setTimeout(resolve, 300));
  }
});

afterAll(async () => {
  await injectionWorker?.stop();
  await app?.close();
});

describe('completeness by injection in the browser', () => {
  it('starts a study from the run page and draws its results and the number counts', async () => {
    const page = app.page;
    await page.goto(`${app.url}/signin`);
    await signIn(page, owner.email, owner.password);
    await page.goto(`${app.url}/runs/${runId}`);
    await page.getByTestId('completeness-link').click();
    await page.waitForURL(new RegExp(`/runs/${runId}/completeness$`));
    await expect
      .poll(() => page.getByTestId('completeness-caution').textContent())
      .toContain('they hold for this image and these settings only');
    await page.getByRole('textbox', { name: 'SNR levels' }).fill('2, 40');
    await page.getByRole('textbox', { name: 'Sources per level' }).fill('4');
    await page.getByRole('textbox', { name: 'Seed' }).fill('11');
    await app.shot('01-setup', { settle: false });
    await page.getByRole('button', { name: 'Start study' }).click();
    await expect
      .poll(() => page.getByTestId('study-status').textContent(), { timeout: 150_000, interval: 500 })
      .toBe('Finished');
    const study = page.getByTestId('study');
    // Plotly drew both study figures and the counts: SVG roots with markers.
    await expect.poll(() => study.locator('.main-svg').count()).toBeGreaterThanOrEqual(2);
    await expect
      .poll(() => page.getByTestId('number-counts').locator('.main-svg').count())
      .toBeGreaterThan(0);
    const table = await page.getByTestId('results-table').textContent();
    expect(table).toMatch(/\/ 4/);
    await expect.poll(() => page.getByTestId('false-rate').textContent()).toMatch(/deg⁻²/);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('02-results', { element: study });
    await app.shot('03-number-counts', { element: page.getByTestId('number-counts') });
    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await app.shot('04-results-dark', { element: study });
    await page.getByTestId('theme-toggle').first().click();
    expect(app.problems).toEqual([]);
  }, 240_000);
});
