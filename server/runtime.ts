/**
 * Everything the app needs at run time, built from the config: database, mail (the development SMTP
 * receiver or the configured SMTP server) and the session secret. Used by index.ts, start.ts and tests.
 */
import { readFileSync } from 'node:fs';
import type { Server } from 'node:http';

import { Model } from 'objection';

import type { Config } from './config';
import { type AppContext, type Logger, consoleLogger } from './context';
import { createKnex } from './db/knex';
import { type DevMailServer, startDevMailServer } from './mail/dev-mail-server';
import { createSmtpMailer } from './mail/mailer';
import { type AppOptions, createApp } from './app';

export const appVersion: string = (
  JSON.parse(readFileSync(new URL('../package.json', import.meta.url), 'utf8')) as { version: string }
).version;

export interface Runtime {
  ctx: AppContext;
  devMail: DevMailServer | null;
  close(): Promise<void>;
}

export async function startRuntime(
  config: Config,
  options: { sessionSecret?: string; logger?: Logger } = {},
): Promise<Runtime> {
  if (!config.databaseUrl) throw new Error('DATABASE_URL is not set.');
  const sessionSecret = options.sessionSecret ?? config.sessionSecret;
  if (!sessionSecret || sessionSecret.length < 16) {
    throw new Error('SESSION_SECRET must be set (at least 16 characters).');
  }
  const logger = options.logger ?? consoleLogger;
  // Objection binds models to one Knex at a time; give the previous binding back on close (tests run several apps).
  const previousKnex = Model.knex() as ReturnType<typeof createKnex> | undefined;
  const knex = createKnex(config.databaseUrl);
  let devMail: DevMailServer | null = null;
  if (config.devMail) devMail = await startDevMailServer(config.devMailPort, (error) => logger.error(error));
  const smtp = devMail
    ? { host: '127.0.0.1', port: devMail.port, secure: false, from: config.smtp.from }
    : {
        host: config.smtp.host ?? 'localhost',
        port: config.smtp.port,
        secure: config.smtp.secure,
        user: config.smtp.user,
        password: config.smtp.password,
        from: config.smtp.from,
      };
  const mailer = createSmtpMailer(smtp, (error) => logger.error(error));
  const ctx: AppContext = { config, knex, mailer, logger, sessionSecret, version: appVersion };
  return {
    ctx,
    devMail,
    async close() {
      await mailer.idle();
      mailer.close();
      await devMail?.close();
      await knex.destroy();
      if (previousKnex && Model.knex() === knex) Model.knex(previousKnex);
    },
  };
}

/** Starts the HTTP server on config.host:config.port; resolves once it listens. */
export async function listen(
  runtime: Runtime,
  appOptions: AppOptions = {},
): Promise<{ server: Server; url: string; close(): Promise<void> }> {
  const built = createApp(runtime.ctx, appOptions);
  const { config } = runtime.ctx;
  const server = await new Promise<Server>((resolve, reject) => {
    const listening = built.app.listen(config.port, config.host, () => resolve(listening));
    listening.once('error', reject);
  });
  const address = server.address();
  const port = address && typeof address === 'object' ? address.port : config.port;
  return {
    server,
    url: `http://${config.host === '0.0.0.0' ? '127.0.0.1' : config.host}:${port}`,
    close: async () => {
      server.closeAllConnections();
      await new Promise<void>((resolve) => server.close(() => resolve()));
      await built.close();
    },
  };
}
