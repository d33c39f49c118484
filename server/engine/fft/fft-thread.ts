/**
 * A persistent helper thread for the 2-D FFTs: the calling thread posts a command through a shared Int32Array,
 * does its own share of rows or columns, then blocks in Atomics.wait until the helper has done the rest. All
 * data lives in SharedArrayBuffers, so nothing is copied through messages and the API stays synchronous.
 *
 * The worker starts in the background; until it reports ready (or if it fails to start) the caller does all the
 * work itself. Both threads run the same code on the same rows and columns, so results are bit-identical either
 * way. The worker is unref'd: it never keeps the process alive.
 *
 * Control words: [0] request count, [1] completed count, [2] command, [3] 1 when ready / −1 when failed.
 */
import { Worker } from 'node:worker_threads';

import { startTypeScriptWorker } from '../threads/start-typescript-worker';

export const COMMAND_STOP = 0;
export const COMMAND_FORWARD_ROWS = 1;
export const COMMAND_FORWARD_COLUMNS = 2;
export const COMMAND_INVERSE_COLUMNS = 3;
export const COMMAND_INVERSE_ROWS = 4;

export interface FftWorkerData {
  kind: 'float32' | 'float64';
  width: number;
  height: number;
  /** Rows [rowSplit, height) and columns [columnSplit, spectrumWidth) are the worker's share. */
  rowSplit: number;
  columnSplit: number;
  control: SharedArrayBuffer;
  params: SharedArrayBuffer;
  buffers: Record<string, SharedArrayBuffer>;
}

/** How long the caller waits for one command before giving up on the worker (it then works alone). */
const COMMAND_TIMEOUT_MS = 60_000;

export class FftThread {
  private readonly control: Int32Array;
  readonly params: Float64Array;
  private readonly worker: Worker;
  private requests = 0;
  private failed = false;

  constructor(data: Omit<FftWorkerData, 'control' | 'params'>) {
    const control = new SharedArrayBuffer(4 * Int32Array.BYTES_PER_ELEMENT);
    const params = new SharedArrayBuffer(4 * Float64Array.BYTES_PER_ELEMENT);
    this.control = new Int32Array(control);
    this.params = new Float64Array(params);
    const workerData: FftWorkerData = { ...data, control, params };
    this.worker = startWorker(workerData);
    this.worker.unref();
    this.worker.on('error', (e) => {
      if (process.env.SKYSIEVE_FFT_DEBUG) console.error(e);
      this.failed = true;
    });
  }

  /** True when the worker has started and can take commands. */
  get ready(): boolean {
    return !this.failed && Atomics.load(this.control, 3) === 1;
  }

  /** Resolves true when ready, false when the worker failed or did not start within `timeoutMs`. */
  async whenReady(timeoutMs = 30_000): Promise<boolean> {
    const start = Date.now();
    while (!this.ready && !this.failed && Date.now() - start < timeoutMs) {
      await new Promise((resolve) => setTimeout(resolve, 10));
    }
    return this.ready;
  }

  /** Posts a command to the worker (call only when ready); pair every call with one finish(). */
  start(command: number): void {
    Atomics.store(this.control, 2, command);
    this.requests++;
    Atomics.store(this.control, 0, this.requests);
    Atomics.notify(this.control, 0);
  }

  /** Blocks until the worker has finished the last command. */
  finish(): void {
    for (;;) {
      const done = Atomics.load(this.control, 1);
      if (done === this.requests) return;
      if (Atomics.wait(this.control, 1, done, COMMAND_TIMEOUT_MS) === 'timed-out') {
        this.failed = true;
        throw new Error('FFT worker thread stopped responding');
      }
    }
  }

  dispose(): void {
    Atomics.store(this.control, 2, COMMAND_STOP);
    Atomics.store(this.control, 0, this.requests + 1);
    Atomics.notify(this.control, 0);
    void this.worker.terminate();
  }
}

function startWorker(workerData: FftWorkerData): Worker {
  return startTypeScriptWorker(new URL('./fft-worker.ts', import.meta.url), { workerData });
}

/** The loop run inside the worker: wait for a command, run it, report completion. */
export function serveCommands(
  data: FftWorkerData,
  run: (command: number, params: Float64Array) => void,
): void {
  const control = new Int32Array(data.control);
  const params = new Float64Array(data.params);
  Atomics.store(control, 3, 1);
  let seen = 0;
  for (;;) {
    Atomics.wait(control, 0, seen);
    seen = Atomics.load(control, 0);
    const command = Atomics.load(control, 2);
    if (command === COMMAND_STOP) return;
    run(command, params);
    Atomics.store(control, 1, seen);
    Atomics.notify(control, 1);
  }
}
