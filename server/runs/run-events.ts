/**
 * GET /api/runs/:id/events: Server-Sent Events (HTML Living Standard, "Server-sent events") with the run's status
 * and progress. The run row is read every `pollMs` (workers may run on other machines, so the database is the one
 * place progress is known); an event is sent when something changed, a comment line every `heartbeatMs` keeps
 * proxies from closing the connection, and the stream ends after the event of a terminal state.
 */
import type { Knex } from 'knex';
import type { Response } from 'express';

import { type RunEvent, isTerminalRunStatus } from '../../shared/runs';

export interface RunEventOptions {
  /** @default 500 */
  pollMs?: number;
  /** @default 15000 */
  heartbeatMs?: number;
}

export function streamRunEvents(
  knex: Knex,
  runId: number,
  req: { on(event: 'close', listener: () => void): unknown },
  res: Response,
  options: RunEventOptions = {},
): void {
  res.status(200);
  res.setHeader('Content-Type', 'text/event-stream; charset=utf-8');
  res.setHeader('Cache-Control', 'no-cache, no-transform');
  res.setHeader('Connection', 'keep-alive');
  res.setHeader('X-Accel-Buffering', 'no');
  res.flushHeaders();
  res.write('retry: 2000\n\n');

  let closed = false;
  let last = '';
  let sequence = 0;
  const close = () => {
    if (closed) return;
    closed = true;
    clearInterval(poll);
    clearInterval(heartbeat);
    res.end();
  };
  const send = async () => {
    const row = (await knex('runs').where('id', runId).first('id', 'status', 'progress', 'errorMessage')) as
      RunEvent | undefined;
    if (closed) return;
    if (!row) {
      res.write(`event: gone\ndata: ${JSON.stringify({ id: runId })}\n\n`);
      close();
      return;
    }
    const event: RunEvent = {
      id: row.id,
      status: row.status,
      progress: row.progress ?? null,
      errorMessage: row.errorMessage,
    };
    const text = JSON.stringify(event);
    if (text !== last) {
      last = text;
      sequence++;
      res.write(
        `id: ${sequence}\nevent: ${isTerminalRunStatus(event.status) ? 'end' : 'run'}\ndata: ${text}\n\n`,
      );
    }
    if (isTerminalRunStatus(event.status)) close();
  };
  let busy = false;
  const tick = () => {
    if (busy || closed) return;
    busy = true;
    send()
      .catch(() => close())
      .finally(() => {
        busy = false;
      });
  };
  const poll = setInterval(tick, options.pollMs ?? 500);
  const heartbeat = setInterval(() => {
    if (!closed) res.write(': heartbeat\n\n');
  }, options.heartbeatMs ?? 15_000);
  req.on('close', close);
  tick();
}
