/**
 * Reads and analyses an upload (engine reader, statistics, noise σ, thumbnail) off the event loop for large
 * files: about 5 s of computation for a 4096 × 4096 image, measured on this 2-core machine, would otherwise
 * stall every other request. Small files (below `THREAD_MIN_BYTES`) are analysed inline, where starting a
 * thread would cost more than it saves. Either way the outcome is the same: an AnalysedImage, or an
 * ImageReadError with the reader's code and message.
 */
import { readFile } from 'node:fs/promises';
import { Worker } from 'node:worker_threads';

import { readImageAsync, type ReadImageOptions } from '../engine/io/read-image';
import { ImageReadError, type ImageReadErrorCode } from '../engine/io/sky-image';
import { startTypeScriptWorker } from '../engine/threads/start-typescript-worker';
import { type AnalysedImage, analyseImage } from './image-analysis';

/** Files from this size on are read in a worker thread. */
export const THREAD_MIN_BYTES = 2 * 1024 ** 2;
/**
 * Large analyses run one at a time per process: each holds the file, its float32 plane and scratch arrays
 * (several hundred MiB at the pixel limit), and the machine has few cores; later uploads wait their turn.
 */
export const MAX_ANALYSIS_THREADS = 1;

let running = 0;
const waiting: (() => void)[] = [];

async function acquireSlot(): Promise<void> {
  if (running < MAX_ANALYSIS_THREADS) {
    running++;
    return;
  }
  // The releasing analysis hands its slot over directly, so `running` stays counted.
  await new Promise<void>((resolve) => waiting.push(resolve));
}

function releaseSlot(): void {
  const next = waiting.shift();
  if (next) next();
  else running--;
}

export interface AnalysisThreadData {
  path: string;
  options: ReadImageOptions;
}

export type AnalysisThreadMessage =
  | { type: 'result'; result: AnalysedImage }
  | { type: 'read-error'; code: ImageReadErrorCode; message: string }
  | { type: 'error'; message: string };

/** Reads the file at `path` (holding `bytes`) and analyses it, in a thread when it is large. */
export async function analyseUpload(
  path: string,
  bytes: Uint8Array,
  options: ReadImageOptions,
): Promise<AnalysedImage> {
  if (bytes.length < THREAD_MIN_BYTES) return analyseImage(await readImageAsync(bytes, options));
  await acquireSlot();
  try {
    return await analyseInThread({ path, options });
  } finally {
    releaseSlot();
  }
}

export function analyseInThread(data: AnalysisThreadData): Promise<AnalysedImage> {
  const worker = startThread(data);
  return new Promise<AnalysedImage>((resolve, reject) => {
    let settled = false;
    const finish = (outcome: () => void) => {
      if (settled) return;
      settled = true;
      void worker.terminate();
      outcome();
    };
    worker.on('message', (message: AnalysisThreadMessage) => {
      if (message.type === 'result') finish(() => resolve(message.result));
      else if (message.type === 'read-error')
        finish(() => reject(new ImageReadError(message.code, message.message)));
      else finish(() => reject(new Error(message.message)));
    });
    worker.on('error', (error) => finish(() => reject(error)));
    worker.on('exit', (code) =>
      finish(() => reject(new Error(`The image analysis thread stopped unexpectedly (exit code ${code}).`))),
    );
  });
}

function startThread(workerData: AnalysisThreadData): Worker {
  return startTypeScriptWorker(new URL('./analysis-thread-worker.ts', import.meta.url), { workerData });
}

/** Body of the thread (analysis-thread-worker.ts): read, analyse, post the planes transferred. */
export async function runAnalysisThread(
  data: AnalysisThreadData,
  post: (message: AnalysisThreadMessage, transfer?: ArrayBuffer[]) => void,
): Promise<void> {
  try {
    const bytes = new Uint8Array(await readFile(data.path));
    const result = analyseImage(await readImageAsync(bytes, data.options));
    const transfer = [result.pixels.buffer, result.mask.buffer, result.thumbnail.buffer] as ArrayBuffer[];
    post({ type: 'result', result }, [...new Set(transfer)]);
  } catch (error) {
    if (error instanceof ImageReadError)
      post({ type: 'read-error', code: error.code, message: error.message });
    else post({ type: 'error', message: error instanceof Error ? error.message : String(error) });
  }
}
