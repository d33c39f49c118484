/**
 * The cross-match journey in a real browser (tests/e2e/support/browser-app.ts: the built client, the real app,
 * Debian's Chromium at 1366 × 768): an editor opens a finished run of a small simulated Lyra Deep Field image,
 * follows its Cross-match button, drops an invented Aster Wide Survey CSV into the page (column names only, so the
 * column form opens; one row cannot be read and is listed), stores it, matches, and sees the summary, the pairs and
 * both catalogues on the image, in light and dark themes without a horizontal scroll bar; a project viewer can
 * match but not add catalogues. Screenshots go to test-artifacts/cross-match/. No console errors.
 */
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { parseWcs } from '../../server/engine/wcs/wcs';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { Run } from '../../server/models/run';
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
let runId = 0;
const people = { editor: '', viewer: '' };

const D = 38.6;
const arcsec = 1 / 3600;
// Our three sources (RA, Dec, flux density) and a reference with a partner 1″ north of the first, one 1.5″ west
// of the second, one far from all and one unreadable row.
const ours = [
  [283.75, D, 0.01],
  [283.752, D + 0.001, 0.02],
  [283.745, D - 0.004, 0.005],
] as const;
const referenceCsv = [
  'name,RAJ2000,DEJ2000,S_int',
  `AWS-A,283.75,${D + arcsec},0.011`,
  `AWS-B,${283.752 + (1.5 * arcsec) / Math.cos(((D + 0.001) * Math.PI) / 180)},${D + 0.001},0.018`,
  `AWS-C,283.756,${D + 0.006},0.03`,
  'AWS-bad,not-an-angle,38.6,0.1',
].join('\n');

beforeAll(async () => {
  app = await startBrowserApp({ artifacts: 'cross-match' });
  page = app.page;
  const ctx = app.runtime.ctx;
  const [editor, viewer] = await Promise.all([
    createUser(ctx, { displayName: 'Ines Calder' }),
    createUser(ctx, { displayName: 'Oskar Brandt' }),
  ]);
  people.editor = editor.email;
  people.viewer = viewer.email;
  const project = await Project.query().insertAndFetch({
    name: 'Lyra Deep Field — tile 9',
    ownerId: editor.id,
  });
  await Membership.query().insert([
    { projectId: project.id, userId: editor.id, role: 'owner' },
    { projectId: project.id, userId: viewer.id, role: 'viewer' },
  ]);
  const imageId = await storeImage(ctx, project.id, editor, simulatedField(41, 64).sky, 'ldf-tile9.fits');
  const { header } = (await ctx.knex('images').where('id', imageId).first('header')) as {
    header: Parameters<typeof parseWcs>[0];
  };
  const wcs = parseWcs(header)!;
  const run = await Run.query().insertAndFetch({
    imageId,
    projectId: project.id,
    createdBy: editor.id,
    status: 'succeeded',
    requestedSettings: {},
    settings: {},
    settingsDigest: 'c'.repeat(64),
    attempts: 1,
    cancelRequested: false,
    resultBytes: 0,
    sourceCount: ours.length,
    finishedAt: new Date(),
  });
  runId = run.id;
  await ctx.knex('run_sources').insert(
    ours.map(([ra, dec, flux], i) => {
      const [x, y] = wcs.worldToPixel(ra, dec);
      return {
        runId,
        sourceId: i + 1,
        x,
        y,
        xErr: 0.1,
        yErr: 0.1,
        ra,
        dec,
        raErrArcsec: 0.15,
        decErrArcsec: 0.15,
        flux,
        fluxErr: flux / 20,
        fluxDensity: flux,
        fluxDensityErr: flux / 20,
        snr: 20,
        significance: null,
        flags: [],
      };
    }),
  );
}, 240_000);

afterAll(async () => {
  await app?.close();
});

describe('cross-matching a run in the browser', () => {
  it('adds a reference catalogue, matches and shows the result in both themes', async () => {
    await page.goto(`${app.url}/signin`);
    await signIn(page, people.editor, testPassword);
    await page.goto(`${app.url}/runs/${runId}`);
    await page.getByTestId('cross-match-link').click();
    await page.waitForURL(/\/runs\/\d+\/cross-match$/);
    await expect
      .poll(() => page.getByTestId('no-catalogues').textContent())
      .toContain('no reference catalogues');

    await page.getByText('Add a reference catalogue', { exact: true }).click();
    await page.getByTestId('catalogue-file-input').setInputFiles({
      name: 'aws-band2.csv',
      mimeType: 'text/csv',
      buffer: Buffer.from(referenceCsv),
    });
    await expect.poll(() => page.getByTestId('preview-summary').textContent()).toContain('4 rows read');
    await expect.poll(() => page.getByTestId('mapping-form').isVisible()).toBe(true);
    await page.getByText('Rows left out (1)').click();
    await expect.poll(() => page.getByTestId('rejected-rows').textContent()).toContain('not-an-angle');
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('01-preview-and-columns');

    await page.getByTestId('store-catalogue').click();
    await expect.poll(() => page.getByTestId('match-setup').textContent()).toContain('aws-band2 (3 entries');
    await page.getByTestId('run-match').click();
    await expect.poll(() => page.getByTestId('figure-matched').textContent()).toBe('2');
    expect(await page.getByTestId('figure-only-ours').textContent()).toBe('1');
    expect(await page.getByTestId('figure-only-theirs').textContent()).toBe('1');
    expect(await page.getByTestId('pairs-table').textContent()).toContain('AWS-A');
    expect(await page.locator('canvas').count()).toBeGreaterThanOrEqual(1);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('02-match-result');
    await app.shot('02b-image-and-pairs', { element: page.getByTestId('match-results') });

    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await app.shot('03-match-result-dark');
    await page.getByTestId('theme-toggle').first().click();
    expect(app.problems).toEqual([]);
  }, 240_000);

  it('lets a project viewer match but not add or delete catalogues', async () => {
    const viewerPage = await app.newPage();
    await viewerPage.goto(`${app.url}/signin`);
    await signIn(viewerPage, people.viewer, testPassword);
    await viewerPage.goto(`${app.url}/runs/${runId}/cross-match`);
    await expect.poll(() => viewerPage.getByTestId('match-setup').textContent()).toContain('aws-band2');
    expect(await viewerPage.getByText('Add a reference catalogue').count()).toBe(0);
    expect(await viewerPage.getByTestId('delete-reference').count()).toBe(0);
    await viewerPage.getByTestId('run-match').click();
    await expect.poll(() => viewerPage.getByTestId('figure-matched').textContent()).toBe('2');
    expect(app.problems).toEqual([]);
  }, 120_000);
});
