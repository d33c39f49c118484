/**
 * Screenshots of the sky viewer preview page in Debian's headless Chromium, and the paint/redraw timings of a
 * 2048² plane measured in that browser. Run: `npx tsx tests/client/viewer/preview/screenshot.ts` (starts its own
 * Vite dev server on a free port; images go to test-artifacts/viewer/).
 */
import { mkdirSync } from 'node:fs';
import { createServer } from 'vite';
import { chromium } from 'playwright-core';

const outDir = 'test-artifacts/viewer';
mkdirSync(outDir, { recursive: true });

const server = await createServer({ server: { port: 0, host: '127.0.0.1' }, logLevel: 'error' });
await server.listen();
const address = server.httpServer?.address();
const port = typeof address === 'object' && address ? address.port : 0;
const browser = await chromium.launch({
  executablePath: '/usr/bin/chromium',
  args: [
    '--headless',
    '--no-sandbox',
    '--disable-gpu',
    '--disable-quic',
    '--no-first-run',
    '--disable-background-networking',
    '--disable-component-update',
    '--disable-sync',
  ],
});
try {
  const page = await browser.newPage({ viewport: { width: 1600, height: 760 } });
  const errors: string[] = [];
  page.on('console', (message) => {
    if (message.type() === 'error' || message.type() === 'warning') errors.push(message.text());
  });
  page.on('pageerror', (error) => errors.push(error.message));
  page.on('response', (response) => {
    if (response.status() >= 400) errors.push(`${response.status()} ${response.url()}`);
  });
  await page.goto(`http://127.0.0.1:${port}/tests/client/viewer/preview/index.html`, { timeout: 120_000 });
  await page.waitForSelector('canvas', { timeout: 120_000 });
  await page.waitForTimeout(1500);
  await page.screenshot({ path: `${outDir}/fitted.png` });

  // Zoom in on the left viewer about a point, then hover a marker.
  const canvas = page.locator('canvas').first();
  const box = (await canvas.boundingBox())!;
  await page.mouse.move(box.x + box.width * 0.45, box.y + box.height * 0.45);
  for (let k = 0; k < 6; k++) await page.mouse.wheel(0, -240);
  await page.waitForTimeout(300);
  await page.screenshot({ path: `${outDir}/zoomed.png` });

  const timings = await page.evaluate(() =>
    (
      window as unknown as { skyViewerPreview: { measure: () => Record<string, number> } }
    ).skyViewerPreview.measure(),
  );
  console.log('2048² plane in headless Chromium (software canvas):', JSON.stringify(timings));
  console.log(
    errors.length ? `console errors/warnings:\n${errors.join('\n')}` : 'no console errors or warnings',
  );
} finally {
  await browser.close();
  await server.close();
}
