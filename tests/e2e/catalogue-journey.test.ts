/**
 * The catalogue builder's journey in a real browser (tests/e2e/support/browser-app.ts: the built client, the real
 * app with a separation worker and an injection-trial worker, Debian's Chromium at 1366 × 768), on one simulated
 * 96 × 96 Lyra Deep Field image (known truth) with two finished runs of different detection thresholds:
 * - compare the two runs from the image library: the comparison page names the settings that differ;
 * - cross-match the first run against a reference catalogue written from the simulated truth (an invented Aster
 *   Wide Survey CSV), dropped into the page: matched / only ours / only theirs as counted independently here from
 *   the stored catalogue, and a median flux ratio near 1;
 * - run a small completeness study and read its plot: the points Plotly drew are the table's completeness values,
 *   and bright injected sources are recovered.
 * Screenshots go to test-artifacts/catalogue-journey/. No console errors.
 */
import type { Page } from 'playwright-core';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';

import type { SimulatedSky } from '../../samples/sky-simulator';
import { Image } from '../../server/models/image';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { Run } from '../../server/models/run';
import { startInjectionWorker } from '../../server/queue/injection-worker';
import type { RunWorker } from '../../server/queue/run-worker';
import { createRun } from '../../server/runs/runs.service';
import { storeImage } from '../server/runs/run-support';
import { createUser } from '../support/test-app';
import {
  type BrowserApp,
  overflowsHorizontally,
  signIn,
  simulatedField,
  startBrowserApp,
} from './support/browser-app';

const builder = {
  email: 'ines.calder@aws.example',
  displayName: 'Ines Calder',
  password: 'lyra-catalogue-96',
};
const imageName = 'lyra-tile8.fits';

let app: BrowserApp;
let page: Page;
let injectionWorker: RunWorker | undefined;
let sky: SimulatedSky;
let projectId = 0;
let runIds: number[] = [];

/** Waits until the run has succeeded (the worker started with the app picks it up). */
async function finished(runId: number): Promise<void> {
  const started = Date.now();
  for (;;) {
    const run = (await Run.query().findById(runId))!;
    if (run.status === 'succeeded') return;
    if (run.status === 'failed' || run.status === 'cancelled' || Date.now() - started > 90_000)
      throw new Error(`Run ${runId} ended as ${run.status}: ${run.errorMessage ?? ''}`);
    await new Promise((resolve) => setTimeout(resolve, 250));
  }
}

/** Angular distance in arcsec between two positions in degrees (small angles; haversine). */
function separationArcsec(ra1: number, dec1: number, ra2: number, dec2: number): number {
  const rad = Math.PI / 180;
  const a =
    Math.sin(((dec2 - dec1) * rad) / 2) ** 2 +
    Math.cos(dec1 * rad) * Math.cos(dec2 * rad) * Math.sin(((ra2 - ra1) * rad) / 2) ** 2;
  return ((2 * Math.asin(Math.sqrt(a))) / rad) * 3600;
}

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'catalogue-journey', worker: true });
  page = app.page;
  const ctx = app.runtime.ctx;
  injectionWorker = await startInjectionWorker(ctx, { pollingIntervalSeconds: 0.5 });
  const user = await createUser(ctx, { ...builder, role: 'member' });
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field — tile 8',
    description: 'Catalogue checks against the Aster Wide Survey.',
    ownerId: user.id,
  });
  projectId = project.id;
  await Membership.query().insert({ projectId, userId: user.id, role: 'owner' });
  sky = simulatedField(23).sky;
  const imageId = await storeImage(ctx, projectId, user, sky, imageName);
  const image = (await Image.query().findById(imageId))!;
  // Two runs that differ in the detection threshold (and the caution about compact sources).
  const fast = { psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 }, noiseSigma: 1e-4, maxIterations: 120 };
  const first = await createRun(ctx, user, image, { ...fast, threshold: 6 });
  const second = await createRun(ctx, user, image, { ...fast, threshold: 4, compactAlpha: 3 });
  runIds = [first.id, second.id];
  await finished(first.id);
  await finished(second.id);
});

afterAll(async () => {
  await injectionWorker?.stop();
  await app?.close();
});

// The steps build on each other: after a failure the rest are skipped instead of timing out one by one.
let broken = false;
beforeEach(({ skip }) => {
  if (broken) skip('an earlier step failed');
});
afterEach(({ task }) => {
  if (task.result?.state === 'fail') broken = true;
});

describe('catalogue journey in the browser', () => {
  it('compares the two runs of the image from the library', async () => {
    await page.goto(`${app.url}/signin`);
    await signIn(page, builder.email, builder.password);
    await page.goto(`${app.url}/projects/${projectId}/images`);
    await page.getByTestId('image-table').getByRole('link', { name: imageName, exact: true }).click();
    await page.getByTestId('run-compare-picker').getByText('Compare runs', { exact: true }).click();
    for (const runId of runIds) await page.getByRole('checkbox', { name: `Compare run ${runId}` }).click();
    await page.getByRole('textbox', { name: 'Comparison name' }).fill('Threshold 6 against 4');
    await page.getByRole('button', { name: 'Compare', exact: true }).click();
    await page.waitForURL(/\/comparisons\/\d+$/);
    await expect.poll(() => page.getByTestId('comparison-name').textContent()).toBe('Threshold 6 against 4');
    const threshold = page.getByTestId('setting-threshold');
    await expect.poll(() => threshold.innerText()).toMatch(/\(SNR\)\s+6\s+4\s*$/);
    await expect
      .poll(() => page.getByTestId('cross-match-summary').textContent(), { timeout: 20_000 })
      .toMatch(/\d/);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('01-comparison');
  });

  it('cross-matches the first run against a reference catalogue written from the simulated truth', async () => {
    const [runId] = runIds as [number];
    // The reference: every simulated source, at its true position, with its true flux density (Jy).
    const truth = sky.truth.sources;
    const csv = [
      'name,ra_deg,dec_deg,flux_jy',
      ...truth.map((s, i) => `AWS-T${String(i + 1).padStart(2, '0')},${s.ra},${s.dec},${s.fluxDensity}`),
    ].join('\n');

    await page.goto(`${app.url}/runs/${runId}`);
    await page.getByTestId('cross-match-link').click();
    await page.waitForURL(new RegExp(`/runs/${runId}/cross-match$`));
    // The default radius: half the restoring beam's FWHM (BMAJ = 3 px of 1.5″ in the simulated header).
    const radiusField = page.getByRole('textbox', { name: /^Match radius \(arcsec\)/ });
    await expect.poll(() => radiusField.getAttribute('placeholder')).toBe('2.25');

    // The matching counted here from the stored catalogue: a truth source is matched when one of our sources
    // lies within that radius; the simulated sources are ≥ 10 px (15″) apart, so none can claim two partners.
    const ours = (await app.runtime.ctx.knex('run_sources').where('runId', runId).select('ra', 'dec')) as {
      ra: number;
      dec: number;
    }[];
    const matched = truth.filter((t) => ours.some((o) => separationArcsec(t.ra, t.dec, o.ra, o.dec) <= 2.25));
    expect(matched.length).toBeGreaterThan(0);

    await page.getByText('Add a reference catalogue', { exact: true }).click();
    await page.getByTestId('catalogue-file-input').setInputFiles({
      name: 'aws-truth-tile8.csv',
      mimeType: 'text/csv',
      buffer: Buffer.from(csv),
    });
    await expect
      .poll(() => page.getByTestId('preview-summary').textContent())
      .toContain(`${truth.length} rows read`);
    // A CSV names its columns only, so the column form opens; RA and Dec are recognised by name, the flux column
    // with its unit suffix is not (the page says so) and is chosen by hand.
    await expect.poll(() => page.getByTestId('mapping-form').isVisible()).toBe(true);
    const noFlux = 'No flux column was recognised';
    await expect.poll(() => page.getByTestId('preview-notes').textContent()).toContain(noFlux);
    await page.getByRole('combobox', { name: /^Flux or flux density/ }).click();
    await page.getByRole('option', { name: 'flux_jy', exact: true }).click();
    const checked = page.waitForResponse(
      (response) => response.url().endsWith('/reference-catalogues/preview') && response.status() === 200,
    );
    await page.getByTestId('check-mapping').click();
    await checked;
    await expect.poll(() => page.getByText(noFlux).count()).toBe(0);
    await app.shot('02-reference-columns');
    await page.getByTestId('store-catalogue').click();
    await expect
      .poll(() => page.getByTestId('match-setup').textContent())
      .toContain(`aws-truth-tile8 (${truth.length} entries`);
    await page.getByTestId('run-match').click();
    await expect.poll(() => page.getByTestId('figure-matched').textContent()).toBe(String(matched.length));
    expect(await page.getByTestId('figure-only-ours').textContent()).toBe(
      String(ours.length - matched.length),
    );
    expect(await page.getByTestId('figure-only-theirs').textContent()).toBe(
      String(truth.length - matched.length),
    );
    // The fit recovers the true flux densities of these bright sources to a few per cent (ratio ours / theirs).
    const ratio = Number(
      /[\d.]+/.exec((await page.getByTestId('figure-flux-ratio').textContent()) ?? '')?.[0],
    );
    expect(ratio).toBeGreaterThan(0.9);
    expect(ratio).toBeLessThan(1.1);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('03-cross-match');
  });

  it('runs a small completeness study and reads its plot', async () => {
    const [runId] = runIds as [number];
    await page.goto(`${app.url}/runs/${runId}`);
    await page.getByTestId('completeness-link').click();
    await page.waitForURL(new RegExp(`/runs/${runId}/completeness$`));
    await page.getByRole('textbox', { name: 'SNR levels' }).fill('3, 40');
    await page.getByRole('textbox', { name: 'Sources per level' }).fill('4');
    await page.getByRole('textbox', { name: 'Seed' }).fill('8');
    await page.getByRole('button', { name: 'Start study' }).click();
    await expect
      .poll(() => page.getByTestId('study-status').textContent(), { timeout: 150_000, interval: 500 })
      .toBe('Finished');

    // The table's completeness per level (the first number of "0.75 (0.41–0.93)").
    const table = page.getByTestId('results-table');
    await expect.poll(() => table.locator('tbody tr').count()).toBe(2);
    const rows = await table
      .locator('tbody tr')
      .evaluateAll((trs) =>
        trs.map((tr) => [...tr.querySelectorAll('td')].map((td) => (td.textContent ?? '').trim())),
      );
    const tableCompleteness = rows.map((cells) => Number(/^[\d.]+/.exec(cells[3] ?? '')?.[0]));

    // The plot: the points Plotly holds in the figure's first trace are the same values, between 0 and 1.
    const figure = page.getByRole('img', { name: /^Completeness at 2 levels/ });
    await expect.poll(() => figure.locator('.main-svg').count()).toBeGreaterThan(0);
    const plotted = await figure.evaluate((element) => {
      const trace = (element as unknown as { data: { x: number[]; y: number[] }[] }).data[0]!;
      return { x: [...trace.x], y: [...trace.y] };
    });
    expect(plotted.y).toHaveLength(2);
    for (const y of plotted.y) {
      expect(y).toBeGreaterThanOrEqual(0);
      expect(y).toBeLessThanOrEqual(1);
    }
    const byX = plotted.x.map((x, i) => [x, plotted.y[i]!] as const).sort((a, b) => a[0] - b[0]);
    const ascending = (values: number[]) => [...values].sort((a, b) => a - b);
    expect(ascending(tableCompleteness)).toEqual(ascending(plotted.y.map((y) => Number(y.toFixed(2)))));
    // Injected at SNR 40, far above the threshold of 6: at least 3 of the 4 are found.
    expect(byX[1]![1]).toBeGreaterThanOrEqual(0.75);
    expect(byX[1]![1]).toBeGreaterThanOrEqual(byX[0]![1]);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('04-completeness', { element: page.getByTestId('study') });

    expect(app.problems).toEqual([]);
  }, 200_000);
});
