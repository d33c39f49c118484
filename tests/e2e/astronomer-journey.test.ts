/**
 * The astronomer's journey in a real browser (Debian's Chromium through playwright-core, headless) against the real
 * app with a separation worker (tests/e2e/support/browser-app.ts): sign in, open a project and its image library,
 * drop a simulated 256 × 256 FITS image (known truth) onto the drop zone, see it in the table and its header cards;
 * set up a run (a preset and one advanced setting), launch it, follow its progress until it finishes, switch
 * components, select a catalogue row and find the viewer centred on its marker, download the CSV and read it back;
 * launch a second run with other settings on the same image; then, as the administrator, lower the astronomer's
 * quota below their usage, see the next upload refused with the server's words in the page, restore the quota and
 * upload again. Also: the upload control is reached by Tab and shows its focus ring; the finished run page's main
 * text meets WCAG AA contrast in both themes; no page is wider than 1366 px; a new run's page never shows the
 * previous run while it loads. No console errors (besides the announced 413). Screenshots at 1366 × 768 (one at
 * 1920 × 1080, one dark) go to test-artifacts/astronomer-journey/.
 */
import { readFileSync } from 'node:fs';

import { parse as parseCsv } from 'csv-parse/sync';
import type { Page } from 'playwright-core';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';

import type { SimulatedSky } from '../../samples/sky-simulator';
import { Membership } from '../../server/models/membership';
import { Project } from '../../server/models/project';
import { User } from '../../server/models/user';
import { quotaExceededMessage } from '../../server/storage/quota';
import { formatBytes } from '../../src/utils/format';
import { createUser } from '../support/test-app';
import {
  type BrowserApp,
  overflowsHorizontally,
  signIn,
  simulatedField,
  startBrowserApp,
  textContrast,
} from './support/browser-app';

const astronomer = {
  email: 'mira.okafor@aws.example',
  displayName: 'Mira Okafor',
  password: 'lyra-field-96',
};
const admin = { email: 'quota.keeper@aws.example', displayName: 'Quota Keeper', password: 'admin-pass-456' };
const projectName = 'Lyra Deep Field — tile 7';
const fileName = 'lyra-tile7-a.fits';
const secondFileName = 'lyra-tile7-b.fits';

let app: BrowserApp;
let page: Page;
let adminPage: Page;
let userId = 0;
let projectId = 0;
let imageId = 0;
let firstRunId = 0;
let sourceCount = 0;
let field: { sky: SimulatedSky; fits: Buffer };

/**
 * Side of the first image: large enough that its fit outlasts a few progress updates (written and streamed every
 * 0.5 s), so the running state can be watched, small enough to finish in seconds.
 */
const fieldSize = 256;
/** A second field (another seed, so not a duplicate of the first file). */
const second = simulatedField(29);
const secondFile = () => ({ name: secondFileName, mimeType: 'application/fits', buffer: second.fits });

/** The run page's status badge. */
const status = () => page.getByTestId('run-status').textContent();

/**
 * Main text of the finished run page stays readable: WCAG 2.2 AA, at least 4.5:1 against what is behind it.
 * Known exception, reported and not checked here: the viewer's grey "Point at the image" hint in the light theme
 * (about 2.4:1).
 */
async function expectReadable(theme: string): Promise<void> {
  const texts = {
    title: page.locator('h1').first(),
    'status badge': page.getByTestId('run-status'),
    caution: page.getByTestId('catalogue-caution').locator('.q-banner__content'),
    'plane switcher': page.getByTestId('plane-switcher').locator('button .block').first(),
    'catalogue header': page.getByTestId('catalogue-table').locator('thead th').nth(2),
    'catalogue cell': page.getByTestId('catalogue-table').locator('tbody td').nth(2),
    'filter label': page.getByTestId('source-table').locator('.q-field__label').first(),
    'export button': page.getByTestId('exports').locator('.block').first(),
    'navigation item': page.locator('.q-drawer .q-item').first(),
  };
  for (const [name, element] of Object.entries(texts))
    expect(await textContrast(element), `contrast of the ${name} (${theme})`).toBeGreaterThanOrEqual(4.5);
}

beforeAll(async () => {
  field = simulatedField(17, fieldSize);
  // The worker starts after the first launch, so the queued state can be seen before the fit begins.
  app = await startBrowserApp({ artifacts: 'astronomer-journey', worker: false });
  page = app.page;
  const user = await createUser(app.runtime.ctx, { ...astronomer, role: 'member' });
  userId = user.id;
  await createUser(app.runtime.ctx, { ...admin, role: 'admin' });
  const project = await Project.query().insertAndFetch({
    name: projectName,
    description: 'Restored radio map, Aster Wide Survey band 2.',
    ownerId: user.id,
  });
  projectId = project.id;
  await Membership.query().insert({ projectId, userId: user.id, role: 'owner' });
});

afterAll(async () => {
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

describe('astronomer journey in the browser', () => {
  it('signs in, opens the project and its library, drops an image, sees its size and header cards', async () => {
    await page.goto(`${app.url}/signin`);
    await signIn(page, astronomer.email, astronomer.password);
    await page.getByTestId('project-link').filter({ hasText: projectName }).click();
    await page.waitForURL(new RegExp(`/projects/${projectId}$`));
    await page.getByTestId('open-images').click();
    await page.waitForURL(new RegExp(`/projects/${projectId}/images$`));
    await expect.poll(() => page.getByTestId('empty-state').textContent()).toContain('No images');

    // Keyboard: Tab from the top of the page reaches "Choose files", which shows a visible focus outline.
    await page.locator('body').focus();
    let reached = false;
    for (let step = 0; step < 30 && !reached; step++) {
      await page.keyboard.press('Tab');
      reached = await page
        .getByTestId('choose-files')
        .evaluate((button) => button.ownerDocument.activeElement === button);
    }
    expect(reached, '"Choose files" reachable by Tab').toBe(true);
    const outline = await page.getByTestId('choose-files').evaluate((button) => {
      const style = button.ownerDocument.defaultView!.getComputedStyle(button);
      return { style: style.outlineStyle, width: parseFloat(style.outlineWidth), colour: style.outlineColor };
    });
    expect(outline.style).toBe('solid');
    expect(outline.width).toBeGreaterThanOrEqual(2);
    expect(outline.colour).not.toMatch(/rgba\(0, 0, 0, 0\)|transparent/);

    // Drop the file onto the drop zone (a DataTransfer built in the page, as a real drag would carry it).
    const dropZone = page.getByTestId('drop-zone');
    const dataTransfer = await dropZone.evaluateHandle(
      (zone, { name, base64 }) => {
        const browser = zone.ownerDocument.defaultView!;
        const bytes = Uint8Array.from(browser.atob(base64), (c: string) => c.charCodeAt(0));
        const transfer = new browser.DataTransfer();
        transfer.items.add(new browser.File([bytes], name, { type: 'application/fits' }));
        return transfer;
      },
      { name: fileName, base64: field.fits.toString('base64') },
    );
    await dropZone.dispatchEvent('dragenter', { dataTransfer });
    await expect.poll(() => dropZone.getAttribute('class')).toContain('ss-drop-zone--over');
    await dropZone.dispatchEvent('drop', { dataTransfer });
    const row = page.getByTestId('upload-row').filter({ hasText: fileName });
    await expect.poll(() => row.getAttribute('data-state'), { timeout: 20_000 }).toBe('done');

    const tableRow = page.getByTestId('image-table').locator('tbody tr').filter({ hasText: 'lyra-tile7-a' });
    await expect.poll(() => tableRow.textContent()).toContain(`${fieldSize} × ${fieldSize}`);
    expect(await tableRow.textContent()).toContain('Jy/beam');
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('01-library');

    // The detail panel: WCS summary and the header cards, searchable.
    await tableRow.getByRole('link').click();
    const detail = page.getByTestId('image-detail');
    await expect.poll(() => detail.getByTestId('header-cards').textContent()).toContain('NAXIS1');
    const cards = await detail.getByTestId('header-cards').innerText();
    const naxis = [new RegExp(`NAXIS1\\s+${fieldSize}\\b`), new RegExp(`NAXIS2\\s+${fieldSize}\\b`)];
    for (const expected of [...naxis, /CTYPE1\s+RA---SIN/, /BUNIT\s+Jy\/beam/, /BMAJ\s+/])
      expect(cards).toMatch(expected);
    expect(await detail.getByTestId('wcs-summary').textContent()).toContain('SIN');
    await detail.getByRole('textbox', { name: 'Search cards' }).fill('BMAJ');
    await expect.poll(() => detail.getByTestId('header-cards').locator('div').count()).toBe(1);
    await app.shot('02-library-detail');
  });

  it('sets up a run with a preset and one advanced setting, launches it and follows it to the end', async () => {
    await page.getByTestId('new-run').click();
    await page.waitForURL(/\/images\/\d+\/runs\/new$/);
    imageId = Number(/\/images\/(\d+)\//.exec(page.url())![1]);
    await expect
      .poll(() => page.getByTestId('setup-image').textContent())
      .toContain(`${fieldSize} × ${fieldSize} pixels`);
    await expect.poll(() => page.getByTestId('earlier-runs').textContent()).toContain('No runs yet');

    await page.getByRole('radio', { name: /deep search/i }).click();
    expect(await page.getByRole('radio', { name: /deep search/i }).getAttribute('aria-checked')).toBe('true');
    // A run-time estimate is shown for the chosen starting point.
    await expect
      .poll(() => page.getByTestId('estimate').textContent())
      .toMatch(/Estimated run time: about \d+ (s|min)/);

    await page.getByTestId('advanced-toggle').click();
    expect(await page.getByTestId('advanced-toggle').getAttribute('aria-expanded')).toBe('true');
    const threshold = page.getByRole('textbox', { name: 'Detection threshold (SNR)' });
    await threshold.fill('six');
    await expect.poll(() => page.getByText('Enter a number, or leave the field empty.').count()).toBe(1);
    expect(await page.getByTestId('launch').isDisabled()).toBe(true);
    await threshold.fill('6');
    await expect.poll(() => page.getByTestId('launch').isDisabled()).toBe(false);
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('03-run-setup');

    await page.getByTestId('launch').click();
    await page.waitForURL(/\/runs\/\d+$/);
    firstRunId = Number(/\/runs\/(\d+)$/.exec(page.url())![1]);
    // No worker yet: the run waits in the queue, with an indeterminate bar.
    await expect.poll(status).toBe('Waiting for a worker');
    expect(await page.getByTestId('run-progress').isVisible()).toBe(true);

    // The fit of 256 × 256 pixels takes about four seconds here, with progress written and streamed every 0.5 s:
    // record every state of the progress section in the page itself, so no update is missed between two looks.
    // The browser's own body element keeps the list (the page's globals are not typed in this Node program).
    type Recorder = { progressSeen: string[] };
    const body = page.locator('body');
    await body.evaluate((element) => {
      const seen: string[] = [];
      (element as unknown as Recorder).progressSeen = seen;
      new element.ownerDocument.defaultView!.MutationObserver(() => {
        const text = element.querySelector('[data-test="run-progress"]')?.textContent ?? '';
        if (text && text !== seen.at(-1)) seen.push(text);
      }).observe(element, { subtree: true, childList: true, characterData: true });
    });
    await app.startWorker();
    const progressSeen = () => body.evaluate((element) => (element as unknown as Recorder).progressSeen);
    const iterations = async () =>
      (await progressSeen()).map((text) => Number(/Iteration:\s*(\d+)/.exec(text)?.[1] ?? 0));
    // Screenshot once the fit reports iterations and the live chart is drawn (or, on a very fast machine, right
    // after the run ended).
    await page.waitForFunction(
      (element) =>
        ((element as unknown as Recorder).progressSeen.some((text) => /Iteration:\s*[1-9]/.test(text)) &&
          element.querySelector('[data-test="run-progress"] .main-svg') !== null) ||
        element.querySelector('[data-test="run-progress"]') === null,
      await body.elementHandle(),
      { polling: 'raf', timeout: 60_000 },
    );
    await app.shot('04-run-in-progress', { settle: false });

    await expect.poll(status, { timeout: 90_000, interval: 250 }).toBe('Finished');
    const states = await progressSeen();
    expect(states.some((text) => text.includes('Stage:'))).toBe(true);
    expect(Math.max(...(await iterations())), `progress seen: ${states.join(' | ')}`).toBeGreaterThan(0);
    // The share done only grows while the run is followed.
    const shares = states.map((text) => Number(/(\d+) % done/.exec(text)?.[1] ?? 0));
    expect(shares).toEqual([...shares].sort((x, y) => x - y));
    await expect.poll(() => page.getByTestId('run-progress').count()).toBe(0);
  }, 150_000);

  it('shows the finished run: components, catalogue, viewer selection and a CSV that matches the table', async () => {
    await expect.poll(() => page.getByTestId('catalogue-caution').textContent()).toContain('model-dependent');
    const switcher = page.getByTestId('plane-switcher');
    for (const label of ['Data', 'Diffuse', 'Compact', 'Model', 'Residual', 'Normalised residual'])
      expect(await switcher.getByRole('button', { name: label, exact: true }).count(), label).toBe(1);

    const heading = await page.getByText(/^Catalogue \(\d+ sources\)$/).textContent();
    sourceCount = Number(/\((\d+) sources\)/.exec(heading!)![1]);
    expect(sourceCount).toBeGreaterThan(0);
    const rows = page.getByTestId('catalogue-table').locator('tbody tr');
    await expect.poll(() => rows.count()).toBe(Math.min(sourceCount, 25));

    await app.shot('05-run-finished');
    await expectReadable('light');
    await app.shot('06-catalogue-table', { element: page.getByTestId('source-table') });

    // Components: the residual plane replaces the data, with its own FITS export.
    await switcher.getByRole('button', { name: 'Residual', exact: true }).click();
    await expect
      .poll(() => page.getByTestId('exports').getByRole('link', { name: 'Residual plane FITS' }).count())
      .toBe(1);
    await expect.poll(() => page.getByRole('application', { name: /^Residual of run/ }).count()).toBe(1);
    await switcher.getByRole('button', { name: 'Data', exact: true }).click();
    await expect.poll(() => page.getByRole('application', { name: /^Data of run/ }).count()).toBe(1);

    // Select the brightest row: the viewer centres on it, and its marker sits under the middle of the picture.
    const firstRow = rows.first();
    const id = (await firstRow.locator('td').nth(1).textContent())!.trim();
    const x = Number((await firstRow.locator('td').nth(2).textContent())!.trim());
    const y = Number((await firstRow.locator('td').nth(3).textContent())!.trim());
    await firstRow.locator('td').nth(3).click();
    await expect.poll(() => firstRow.getAttribute('class')).toContain('selected');
    const canvas = page.getByRole('application', { name: /^Data of run/ }).locator('canvas');
    const box = (await canvas.boundingBox())!;
    await page.mouse.move(box.x + box.width / 2, box.y + box.height / 2);
    await expect.poll(() => page.getByTestId('marker-tooltip').textContent()).toContain(`Source ${id}`);
    const readout = (await page.getByTestId('readout').locator('span').first().textContent())!;
    const [, rx, ry] = /x (\d+), y (\d+)/.exec(readout)!;
    expect(Math.abs(Number(rx) - x)).toBeLessThanOrEqual(1);
    expect(Math.abs(Number(ry) - y)).toBeLessThanOrEqual(1);
    await app.shot('07-row-selected');

    // The CSV download: the standard columns and as many records as the table has sources.
    const [download] = await Promise.all([
      page.waitForEvent('download'),
      page.getByTestId('exports').getByRole('link', { name: 'Catalogue CSV' }).click(),
    ]);
    const text = readFileSync((await download.path())!, 'utf8');
    const records = parseCsv(text, { columns: true, skip_empty_lines: true }) as Record<string, string>[];
    const header = text.slice(0, text.indexOf('\r\n')).split(',');
    const wanted = ['id', 'x', 'y', 'ra', 'dec', 'flux', 'flux_err', 'snr'];
    expect(header).toEqual(expect.arrayContaining(wanted));
    expect(wanted.map((name) => header.indexOf(name))).toEqual(
      [...wanted.map((name) => header.indexOf(name))].sort((a, b) => a - b),
    );
    expect(records).toHaveLength(sourceCount);
    const selected = records.find((record) => record.id === id)!;
    expect(Number(selected.x)).toBeCloseTo(x, 2);
    expect(Number(selected.y)).toBeCloseTo(y, 2);
    // Known truth: the simulated sources are all bright (ideal SNR ≳ 20), so at least 80 % of them should lie within
    // 1.5 px of a catalogued one (catalogue positions are FITS 1-based, the simulator's 0-based).
    const found = field.sky.truth.sources.filter((truth) =>
      records.some((r) => Math.hypot(Number(r.x) - (truth.x + 1), Number(r.y) - (truth.y + 1)) < 1.5),
    );
    expect(found.length).toBeGreaterThanOrEqual(Math.ceil(0.8 * field.sky.truth.sources.length));

    // The same page, from its top, at 1920 × 1080 and in the dark theme.
    await page.locator('h1').first().scrollIntoViewIfNeeded();
    await page.setViewportSize({ width: 1920, height: 1080 });
    expect(await overflowsHorizontally(page)).toBe(false);
    await app.shot('08-run-finished-1920');
    await page.setViewportSize({ width: 1366, height: 768 });
    await page.getByTestId('theme-toggle').first().click();
    await expect
      .poll(() => page.locator('body').evaluate((body) => body.classList.contains('body--dark')))
      .toBe(true);
    await page.mouse.move(600, 700); // away from the toggle, so its tooltip is not in the picture
    await app.shot('09-run-finished-dark');
    await expectReadable('dark');
    await page.getByTestId('theme-toggle').first().click();
    expect(await overflowsHorizontally(page)).toBe(false);
  });

  it('launches a second run of the same image with other settings', async () => {
    await page.getByRole('link', { name: 'lyra-tile7-a' }).first().click();
    await page.waitForURL(new RegExp(`/projects/${projectId}/images$`));
    await page.getByTestId('image-table').getByRole('link', { name: 'lyra-tile7-a' }).click();
    await page.getByTestId('new-run').click();
    await page.waitForURL(new RegExp(`/images/${imageId}/runs/new$`));
    await expect
      .poll(() => page.getByTestId('earlier-runs').textContent())
      .toMatch(new RegExp(`Run ${firstRunId}\\s*succeeded · ${sourceCount} sources`));

    expect(await page.getByRole('radio', { name: /balanced/i }).getAttribute('aria-checked')).toBe('true');
    await page.getByTestId('advanced-toggle').click();
    await page.getByRole('textbox', { name: 'Detection threshold (SNR)' }).fill('4');
    await page.getByRole('textbox', { name: 'Caution about compact sources' }).fill('3');
    await page.getByTestId('launch').click();
    await page.waitForURL(/\/runs\/\d+$/);
    const secondRunId = Number(/\/runs\/(\d+)$/.exec(page.url())![1]);
    expect(secondRunId).not.toBe(firstRunId);
    // The first run's state, still in the store, must not stand in for the new run while it loads.
    expect(await page.locator('h1').allTextContents()).not.toContain(`Run ${firstRunId}`);
    await expect.poll(() => page.locator('h1').first().textContent()).toBe(`Run ${secondRunId}`);
    await expect.poll(status, { timeout: 90_000, interval: 250 }).toBe('Finished');

    const settings = await page.getByTestId('settings-table').innerText();
    expect(settings).toMatch(/preset\s+balanced/);
    expect(settings).toMatch(/threshold\s+4/);
    expect(settings).toMatch(/compactAlpha\s+3/);
    await page.goto(`${app.url}/runs/${firstRunId}`);
    await expect.poll(status).toBe('Finished');
    const firstSettings = await page.getByTestId('settings-table').innerText();
    expect(firstSettings).toMatch(/preset\s+deep-search/);
    expect(firstSettings).toMatch(/threshold\s+6/);
  }, 120_000);

  it('as administrator lowers the quota below the usage: the next upload is refused in plain words', async () => {
    adminPage = await app.newPage();
    await adminPage.goto(`${app.url}/signin`);
    await signIn(adminPage, admin.email, admin.password);
    await adminPage.goto(`${app.url}/admin/users`);
    const { quotaBytes: originalQuota, bytesUsed } = (await User.query().findById(userId))!;
    expect(bytesUsed).toBeGreaterThan(field.fits.byteLength);
    const lowQuota = Math.round(0.1 * 2 ** 20); // 0.1 MiB, below the image plus two runs' results
    expect(lowQuota).toBeLessThan(bytesUsed);

    const openQuota = async () => {
      await adminPage.getByRole('button', { name: `Change the quota of ${astronomer.displayName}` }).click();
      await expect.poll(() => adminPage.getByRole('dialog').textContent()).toContain('Storage quota of');
    };
    const setQuota = async (amount: string, unit: 'MiB' | 'GiB') => {
      const dialog = adminPage.getByRole('dialog');
      await dialog.getByRole('spinbutton', { name: 'Quota' }).fill(amount);
      await dialog.getByRole('combobox', { name: 'Unit' }).click();
      await adminPage.getByRole('option', { name: unit, exact: true }).click();
      await dialog.getByRole('button', { name: 'Save quota' }).click();
    };
    await openQuota();
    await setQuota('0.1', 'MiB');
    await expect
      .poll(() => adminPage.locator('.q-notification').first().textContent())
      .toContain(`Quota of ${astronomer.displayName} set to ${formatBytes(lowQuota)}.`);
    await expect.poll(async () => (await User.query().findById(userId))!.quotaBytes).toBe(lowQuota);
    expect(await overflowsHorizontally(adminPage)).toBe(false);
    await app.shot('10-admin-users', { page: adminPage });

    // The astronomer's next upload: refused, with the server's own sentence beside the file.
    await page.goto(`${app.url}/projects/${projectId}/images`);
    app.expectRefusal(413, `/api/projects/${projectId}/images`);
    await page.getByTestId('file-input').setInputFiles(secondFile());
    const row = page.getByTestId('upload-row').filter({ hasText: secondFileName });
    await expect.poll(() => row.getAttribute('data-state'), { timeout: 20_000 }).toBe('failed');
    const message = (await row.getByRole('alert').textContent())!.trim();
    expect(message).toBe(
      quotaExceededMessage({
        usedBytes: bytesUsed,
        quotaBytes: lowQuota,
        neededBytes: second.fits.byteLength,
      }),
    );
    expect(message).not.toMatch(/payload_too_large|413|\{/);
    await app.shot('11-upload-refused');

    // Restore the quota; the same file then goes through.
    await openQuota();
    await setQuota(String(originalQuota / 2 ** 30), 'GiB');
    await expect.poll(async () => (await User.query().findById(userId))!.quotaBytes).toBe(originalQuota);
    await row.getByRole('button', { name: `Remove ${secondFileName} from this list` }).click();
    await page.getByTestId('file-input').setInputFiles(secondFile());
    await expect
      .poll(
        () => page.getByTestId('upload-row').filter({ hasText: secondFileName }).getAttribute('data-state'),
        {
          timeout: 20_000,
        },
      )
      .toBe('done');
    await expect.poll(() => page.getByTestId('image-table').locator('tbody tr').count()).toBe(2);

    expect(app.problems).toEqual([]);
  }, 90_000);
});
