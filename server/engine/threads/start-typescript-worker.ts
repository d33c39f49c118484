/**
 * Starts a worker thread whose entry is a module of this project, the same way under tsx, under vitest and from
 * compiled JavaScript.
 *
 * From compiled JavaScript the entry's `.js` file is started directly. Under tsx or vitest the modules are
 * TypeScript, and Node 20 does not apply `--import tsx` to a worker's entry module; a small evaluated bootstrap
 * registers tsx's loader (resolved from this file, not from the working directory) and then imports the entry.
 */
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { Worker, type WorkerOptions } from 'node:worker_threads';

/**
 * @param entry URL of the worker's TypeScript module, e.g. `new URL('./fft-worker.ts', import.meta.url)`;
 *   from compiled JavaScript the `.js` file beside it is started instead.
 * @param options passed to `new Worker` as they are (workerData, transferList, …); `eval` is set here.
 */
export function startTypeScriptWorker(entry: URL, options: Omit<WorkerOptions, 'eval'> = {}): Worker {
  if (!entry.pathname.endsWith('.ts'))
    throw new Error(`Worker entry must be a .ts module, got ${entry.href}`);
  if (!import.meta.url.endsWith('.ts'))
    return new Worker(new URL(entry.href.replace(/\.ts$/, '.js')), options);
  const bootstrap =
    `import(${JSON.stringify(resolveTsxApi())}).then((tsx) => { (tsx.register ?? tsx.default.register)(); ` +
    `return import(${JSON.stringify(entry.href)}); });`;
  return new Worker(bootstrap, { ...options, eval: true });
}

/** URL of tsx's ESM API (its `import` export; the CommonJS one fails to load its own ESM half in a worker). */
function resolveTsxApi(): string {
  if (typeof import.meta.resolve === 'function') return import.meta.resolve('tsx/esm/api');
  const packageJson = createRequire(import.meta.url).resolve('tsx/package.json');
  return pathToFileURL(packageJson.replace(/package\.json$/, 'dist/esm/api/index.mjs')).href;
}
