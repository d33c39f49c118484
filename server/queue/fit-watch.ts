/**
 * What the run job (queue/run-job.ts) and the injection-trial job (injection/trial-job.ts) share while a fit runs
 * in its thread: one AbortController that stops the fit on a cancel request, at the time limit or when the worker
 * shuts down, and remembers which of the three came first; a poll that reads the cancel flag (never two reads at
 * once); and which errors pg-boss should retry.
 */
export type FitStopReason = 'cancel' | 'timeout' | 'shutdown';

export interface FitWatchOptions {
  /** The fit's time limit. */
  timeoutMs: number;
  /** Aborted when the worker shuts down. */
  shutdown?: AbortSignal;
  /** How often `cancelled` is asked. @default 500 */
  pollMs?: number;
  /** Whether the job was cancelled (or ended elsewhere); a rejection is logged and the poll goes on. */
  cancelled: () => Promise<boolean>;
  logError: (error: unknown) => void;
}

export interface FitWatch {
  /** Hand this to the fit thread. */
  signal: AbortSignal;
  /** Why the fit was stopped; null while it was not. */
  reason(): FitStopReason | null;
  /** Stops reading the cancel flag (the fit has ended); the time limit and shutdown still count. */
  stopPolling(): void;
  /** Stops everything: the poll, the time limit and the shutdown listener. */
  dispose(): void;
}

export function watchFit(options: FitWatchOptions): FitWatch {
  const controller = new AbortController();
  let reason: FitStopReason | null = null;
  const abort = (why: FitStopReason) => {
    if (controller.signal.aborted) return;
    reason = why;
    controller.abort();
  };
  const onShutdown = () => abort('shutdown');
  if (options.shutdown?.aborted) abort('shutdown');
  options.shutdown?.addEventListener('abort', onShutdown, { once: true });
  const timeout = setTimeout(() => abort('timeout'), options.timeoutMs);
  let polling = false;
  const poll = setInterval(() => {
    if (polling) return;
    polling = true;
    void options
      .cancelled()
      .then((cancelled) => {
        if (cancelled) abort('cancel');
      })
      .catch(options.logError)
      .finally(() => {
        polling = false;
      });
  }, options.pollMs ?? 500);
  return {
    signal: controller.signal,
    reason: () => reason,
    stopPolling: () => clearInterval(poll),
    dispose() {
      clearTimeout(timeout);
      clearInterval(poll);
      options.shutdown?.removeEventListener('abort', onShutdown);
    },
  };
}

/** A time limit in minutes for messages, to two decimals. */
export function timeLimitMinutes(timeoutMs: number): number {
  return Math.round((timeoutMs / 60_000) * 100) / 100;
}

/** Errors of the machinery (a dead fit thread, the database), not of the job: rethrown so pg-boss retries. */
export function isRetryableFitError(error: unknown): boolean {
  return error instanceof Error && /stopped unexpectedly|database|ECONN|terminat/i.test(error.message);
}
