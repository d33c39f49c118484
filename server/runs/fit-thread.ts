/**
 * Runs one separation in a worker thread, so the worker process's event loop (pg-boss polling, progress writes,
 * cancel checks) stays free while the fit computes. `runFitInThread` resolves with the planes, catalogue and
 * diagnostics, or rejects with the engine's message; an aborted signal stops the fit (FitCancelledError), and a
 * thread that does not stop within `graceMs` after the abort is terminated.
 */
import { Worker } from 'node:worker_threads';

import type { CatalogueSource } from '../../shared/catalogue';
import type { JointImageComponent, JointImageOptions, JointResults } from '../../shared/joint-runs';
import type { ComponentName, RunDiagnostics, RunProgress } from '../../shared/runs';
import type { ResolvedSeparationSettings } from '../../shared/separation-settings';
import type { HeaderCard } from '../engine/io/header-card';
import type { Beam } from '../engine/psf';
import { startTypeScriptWorker } from '../engine/threads/start-typescript-worker';

export interface FitThreadInput {
  width: number;
  height: number;
  /** Row-major, x fastest; transferred to the thread (unusable by the caller afterwards). */
  pixels: Float32Array;
  /** 1 = valid, 0 = blank; null when every pixel is valid. */
  mask: Uint8Array | null;
  /** Header cards of the image (the WCS is rebuilt from them in the thread). */
  header: HeaderCard[];
  beam: Beam | null;
  unit: string | null;
  settings: unknown;
  /** A joint run: the fields above are image 1 (the reference); these are images 2…n and the options. */
  joint?: {
    referenceName: string;
    others: JointThreadImage[];
    /** By position − 1 (index 0 = the reference). */
    perImage: JointImageOptions[];
    inputSha256: string[];
  };
}

/** Another input image of a joint run (its pixels and mask are transferred like the reference's). */
export interface JointThreadImage {
  name: string;
  width: number;
  height: number;
  pixels: Float32Array;
  mask: Uint8Array | null;
  header: HeaderCard[];
  beam: Beam | null;
  unit: string | null;
}

export interface FitThreadResult {
  width: number;
  height: number;
  settings: ResolvedSeparationSettings;
  settingsDigest: string;
  catalogue: CatalogueSource[];
  planes: Record<ComponentName, Float32Array>;
  /** Planes whose size differs from width × height (a joint run's common-grid sky fields). */
  planeSizes?: Partial<Record<ComponentName, { width: number; height: number }>>;
  diagnostics: RunDiagnostics;
  timings: Record<string, number>;
  /** Joint runs: the planes of images 2…n and what the row keeps of the fit. */
  joint?: {
    imagePlanes: {
      position: number;
      width: number;
      height: number;
      planes: Record<JointImageComponent, Float32Array>;
    }[];
    results: JointResults;
  };
}

export interface FitThreadData {
  input: FitThreadInput;
  cancelFlag: SharedArrayBuffer;
  progressIntervalMs: number;
}

export type FitThreadMessage =
  | { type: 'progress'; progress: RunProgress }
  | { type: 'result'; result: FitThreadResult }
  | { type: 'error'; message: string; cancelled: boolean };

export class FitCancelledError extends Error {
  constructor() {
    super('The run was cancelled.');
    this.name = 'FitCancelledError';
  }
}

export interface FitThreadOptions {
  onProgress?: (progress: RunProgress) => void;
  signal?: AbortSignal;
  /** Minimum time between progress messages. @default 250 */
  progressIntervalMs?: number;
  /** How long an aborted fit may take to stop before the thread is terminated. @default 5000 */
  graceMs?: number;
}

export function runFitInThread(
  input: FitThreadInput,
  options: FitThreadOptions = {},
): Promise<FitThreadResult> {
  if (options.signal?.aborted) return Promise.reject(new FitCancelledError());
  const cancelFlag = new SharedArrayBuffer(4);
  const data: FitThreadData = { input, cancelFlag, progressIntervalMs: options.progressIntervalMs ?? 250 };
  const transfer = [input, ...(input.joint?.others ?? [])].flatMap((image) => [
    image.pixels.buffer as ArrayBuffer,
    ...(image.mask ? [image.mask.buffer as ArrayBuffer] : []),
  ]);
  const worker = startThread(data, transfer);
  return new Promise<FitThreadResult>((resolve, reject) => {
    let settled = false;
    let graceTimer: NodeJS.Timeout | undefined;
    const finish = (outcome: () => void) => {
      if (settled) return;
      settled = true;
      clearTimeout(graceTimer);
      options.signal?.removeEventListener('abort', onAbort);
      void worker.terminate();
      outcome();
    };
    const onAbort = () => {
      Atomics.store(new Int32Array(cancelFlag), 0, 1);
      graceTimer = setTimeout(() => finish(() => reject(new FitCancelledError())), options.graceMs ?? 5000);
    };
    options.signal?.addEventListener('abort', onAbort, { once: true });
    worker.on('message', (message: FitThreadMessage) => {
      if (message.type === 'progress') options.onProgress?.(message.progress);
      else if (message.type === 'result') finish(() => resolve(message.result));
      else
        finish(() =>
          reject(
            message.cancelled || options.signal?.aborted
              ? new FitCancelledError()
              : new Error(message.message),
          ),
        );
    });
    worker.on('error', (error) => finish(() => reject(error)));
    worker.on('exit', (code) =>
      finish(() => reject(new Error(`The fit thread stopped unexpectedly (exit code ${code}).`))),
    );
  });
}

function startThread(workerData: FitThreadData, transferList: ArrayBuffer[]): Worker {
  return startTypeScriptWorker(new URL('./fit-thread-worker.ts', import.meta.url), {
    workerData,
    transferList,
  });
}
