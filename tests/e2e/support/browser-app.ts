/**
 * The real app for browser tests: the client built with Vite's build() into a temp folder, the Express app from
 * server/app.ts on a free 127.0.0.1 port, its own migrated database (from `npm test`'s template), the development
 * SMTP receiver and, when asked, a separation worker (pg-boss on the same database, the fit in a worker thread) so
 * runs finish. Debian's Chromium through playwright-core, headless, 1366 × 768, light theme. Every page opened
 * through it reports console errors and uncaught exceptions into `problems`, except refusals the test announced.
 */
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

import {
  chromium,
  selectors,
  type Browser,
  type BrowserContext,
  type Locator,
  type Page,
} from 'playwright-core';
import { build } from 'vite';

import { simulateSky, type SimulatedSky } from '../../../samples/sky-simulator';
import { findFreePort } from '../../../server/db/postgres-cluster';
import { writeFits } from '../../../server/engine/io/write-fits';
import { configureRunQueue, stopRunQueue } from '../../../server/queue/run-queue';
import { type RunWorker, startRunWorker } from '../../../server/queue/run-worker';
import { listen, startRuntime, type Runtime } from '../../../server/runtime';
import { silentLogger, testConfig } from '../../support/test-app';
import { createTestDatabase, type TestDatabase } from '../../support/test-database';

const root = fileURLToPath(new URL('../../..', import.meta.url));

// Launch flags from ../shared/STACK.md: without the background-networking ones Chromium keeps trying to reach out.
const chromiumArgs = [
  '--headless',
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
];

export const laptopViewport = { width: 1366, height: 768 };

export interface BrowserAppOptions {
  /** Folder under test-artifacts/ for this file's screenshots. */
  artifacts: string;
  /** Start a separation worker beside the server (polling every 0.5 s). @default false */
  worker?: boolean;
}

export interface ShotOptions {
  page?: Page;
  element?: Locator;
  /** @default true */
  settle?: boolean;
}

export interface BrowserApp {
  url: string;
  runtime: Runtime;
  browser: Browser;
  /** The first page, in its own context. */
  page: Page;
  /** Console errors and uncaught exceptions of every page opened here, minus the announced refusals. */
  problems: string[];
  /** A further page in a context of its own (its own cookies: another person), watched like the first. */
  newPage(): Promise<Page>;
  /** The next console error for an answer `status` from a URL ending in `pathEnd` is expected (once). */
  expectRefusal(status: number, pathEnd: string): void;
  /**
   * A screenshot into the artifacts folder: of `page` (default: the first page) or of one `element`, after the
   * network settles (`settle: false` for pages holding a live stream open, which never settle).
   */
  shot(name: string, options?: ShotOptions): Promise<void>;
  /** Starts the separation worker (if `worker` was false or it was stopped). */
  startWorker(): Promise<void>;
  close(): Promise<void>;
}

export async function startBrowserApp(options: BrowserAppOptions): Promise<BrowserApp> {
  const artifacts = path.join(root, 'test-artifacts', options.artifacts);
  mkdirSync(artifacts, { recursive: true });
  const clientDir = mkdtempSync(path.join(os.tmpdir(), 'skysieve-client-'));
  const contexts: BrowserContext[] = [];
  let db: TestDatabase | undefined;
  let runtime: Runtime | undefined;
  let server: { url: string; close(): Promise<void> } | undefined;
  let worker: RunWorker | undefined;
  let browser: Browser | undefined;

  const close = async () => {
    for (const context of contexts) await context.close().catch(() => undefined);
    await browser?.close();
    await server?.close();
    await worker?.stop();
    if (runtime) await stopRunQueue(runtime.ctx);
    await runtime?.close();
    await db?.drop();
    rmSync(clientDir, { recursive: true, force: true });
  };

  try {
    await build({
      root,
      configFile: path.join(root, 'vite.config.ts'),
      mode: 'production',
      logLevel: 'warn',
      build: { outDir: clientDir, emptyOutDir: true },
    });

    db = await createTestDatabase('e2e');
    const port = await findFreePort();
    const config = testConfig({
      databaseUrl: db.url,
      port,
      host: '127.0.0.1',
      publicUrl: `http://127.0.0.1:${port}`,
    });
    runtime = await startRuntime(config, {
      sessionSecret: 'e2e-session-secret-0123456789',
      logger: silentLogger,
    });
    configureRunQueue(runtime.ctx, { pollingIntervalSeconds: 0.5 });
    server = await listen(runtime, { clientDirectory: clientDir });

    const startWorker = async () => {
      worker ??= await startRunWorker(runtime!.ctx, {
        concurrency: 1,
        pollingIntervalSeconds: 0.5,
        maintenanceIntervalSeconds: 5,
      });
    };
    if (options.worker) await startWorker();

    // The client marks elements for tests with data-test (as the component tests do).
    selectors.setTestIdAttribute('data-test');
    browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: chromiumArgs });

    const problems: string[] = [];
    const refusals: { status: number; pathEnd: string }[] = [];
    const watch = (page: Page) => {
      page.on('console', (message) => {
        if (message.type() !== 'error') return;
        const text = message.text();
        const url = message.location().url;
        const expected = refusals.findIndex(
          (refusal) => text.includes(`status of ${refusal.status}`) && url.endsWith(refusal.pathEnd),
        );
        if (expected >= 0) {
          refusals.splice(expected, 1);
          return;
        }
        problems.push(`console: ${text} (${url})`);
      });
      page.on('pageerror', (error) => problems.push(`page error: ${error.message}`));
    };
    const newPage = async () => {
      const context = await browser!.newContext({ viewport: laptopViewport, colorScheme: 'light' });
      contexts.push(context);
      const page = await context.newPage();
      watch(page);
      return page;
    };
    const page = await newPage();

    return {
      url: server.url,
      runtime,
      browser,
      page,
      problems,
      newPage,
      expectRefusal: (status, pathEnd) => refusals.push({ status, pathEnd }),
      async shot(name, { page: target = page, element, settle = true } = {}) {
        if (settle) await target.waitForLoadState('networkidle');
        const file = path.join(artifacts, `${name}.png`);
        // Transitions (e.g. the theme's colours) are finished first, so the picture shows the settled page.
        await (element ?? target).screenshot({ path: file, animations: 'disabled' });
      },
      startWorker,
      close,
    };
  } catch (error) {
    await close().catch(() => undefined);
    throw error;
  }
}

/** Signs in on the sign-in page (`page` must be on it) and waits for the project list. */
export async function signIn(page: Page, email: string, password: string): Promise<void> {
  await page.getByRole('textbox', { name: 'E-mail address', exact: true }).fill(email);
  await page.getByRole('textbox', { name: 'Password', exact: true }).fill(password);
  await page.getByRole('button', { name: 'Sign in' }).click();
  await page.waitForURL(/\/projects$/);
}

/** Signs out through the account menu and waits for the sign-in page. */
export async function signOut(page: Page): Promise<void> {
  await page.getByRole('button', { name: /^Account menu for/ }).click();
  await page.getByText('Sign out', { exact: true }).click();
  await page.waitForURL(/\/signin/);
}

/** Whether the page is wider than its window (a horizontal scroll bar at this size). */
export function overflowsHorizontally(page: Page): Promise<boolean> {
  return page.locator('html').evaluate((html) => html.scrollWidth > html.clientWidth + 1);
}

/**
 * A small simulated field of the Lyra Deep Field (samples/sky-simulator.ts, seeded): a log-normal diffuse field,
 * a few point sources well above the noise (known truth), Gaussian noise σ = 1e-4 Jy/beam, a SIN WCS and a 3 px
 * restoring beam; `fits` is the file the FITS writer makes of it.
 */
export function simulatedField(seed: number, size = 96): { sky: SimulatedSky; fits: Buffer } {
  const sky = simulateSky({
    width: size,
    height: size,
    seed,
    psf: { fwhmMajorPx: 3, fwhmMinorPx: 3, paDeg: 0 },
    diffuse: { level: 2e-4, logStd: 0.4, slope: 3.5 },
    sources: {
      count: Math.round((5 * size * size) / 4096),
      minFlux: 1e-2,
      maxFlux: 3e-2,
      minSeparationPx: 10,
    },
    noise: { kind: 'gaussian', sigma: 1e-4 },
    wcs: { projection: 'SIN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
    unit: 'Jy/beam',
    writeBeam: true,
  });
  const fits = Buffer.from(
    writeFits({ width: sky.width, height: sky.height, data: sky.image }, { header: sky.header }),
  );
  return { sky, fits };
}

/**
 * WCAG 2.x contrast ratio of an element's text colour against the first opaque background behind it (walking up
 * the ancestors; semi-transparent layers are blended in order). Formula: WCAG 2.2, "contrast ratio" and
 * "relative luminance" definitions; 4.5 is the AA minimum for body text, 3 for large text.
 */
export function textContrast(element: Locator): Promise<number> {
  return element.evaluate((start) => {
    const view = start.ownerDocument.defaultView!;
    const parse = (text: string) => {
      const parts = /rgba?\(([^)]+)\)/
        .exec(text)?.[1]
        ?.split(/[,\s/]+/)
        .filter(Boolean)
        .map(Number) ?? [0, 0, 0, 0];
      return { r: parts[0]!, g: parts[1]!, b: parts[2]!, a: parts[3] ?? 1 };
    };
    const layers: { r: number; g: number; b: number; a: number }[] = [];
    for (let node: typeof start | null = start; node; node = node.parentElement) {
      const colour = parse(view.getComputedStyle(node).backgroundColor);
      if (colour.a > 0) layers.push(colour);
      if (colour.a >= 1) break;
    }
    let back = { r: 255, g: 255, b: 255 };
    for (const layer of layers.reverse())
      back = {
        r: layer.r * layer.a + back.r * (1 - layer.a),
        g: layer.g * layer.a + back.g * (1 - layer.a),
        b: layer.b * layer.a + back.b * (1 - layer.a),
      };
    const text = parse(view.getComputedStyle(start).color);
    const fore = {
      r: text.r * text.a + back.r * (1 - text.a),
      g: text.g * text.a + back.g * (1 - text.a),
      b: text.b * text.a + back.b * (1 - text.a),
    };
    const luminance = ({ r, g, b }: { r: number; g: number; b: number }) => {
      const channel = (v: number) => {
        const s = v / 255;
        return s <= 0.04045 ? s / 12.92 : ((s + 0.055) / 1.055) ** 2.4;
      };
      return 0.2126 * channel(r) + 0.7152 * channel(g) + 0.0722 * channel(b);
    };
    const [light, dark] = [luminance(fore), luminance(back)].sort((x, y) => y - x);
    return (light! + 0.05) / (dark! + 0.05);
  });
}
