/**
 * Samples the process's resident set size from a worker thread every 20 ms, so the high-water mark is seen even
 * while the main thread is busy in a long synchronous computation (RSS is process-wide, so the worker sees it).
 */
import { Worker } from 'node:worker_threads';

const SAMPLER_SOURCE = `
const { workerData } = require('node:worker_threads');
const peak = new Float64Array(workerData);
const tick = () => { const rss = process.memoryUsage.rss(); if (rss > peak[0]) peak[0] = rss; };
tick();
setInterval(tick, 20);
`;

export class MemorySampler {
  private readonly peak = new Float64Array(new SharedArrayBuffer(8));
  private readonly worker: Worker;

  constructor() {
    this.peak[0] = process.memoryUsage.rss();
    this.worker = new Worker(SAMPLER_SOURCE, { eval: true, workerData: this.peak.buffer });
    this.worker.unref();
  }

  /** Highest RSS seen so far, bytes. */
  get peakBytes(): number {
    return Math.max(this.peak[0]!, process.memoryUsage.rss());
  }

  reset(): void {
    this.peak[0] = process.memoryUsage.rss();
  }

  async stop(): Promise<void> {
    await this.worker.terminate();
  }
}
