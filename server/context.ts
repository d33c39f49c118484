/** What the app is built from: configuration, database, mailer and a logger. Tests build their own. */
import type { Knex } from 'knex';

import type { Config } from './config';
import type { Mailer } from './mail/mailer';

export interface Logger {
  info(message: string): void;
  error(error: unknown): void;
}

export interface AppContext {
  config: Config;
  knex: Knex;
  mailer: Mailer;
  logger: Logger;
  /** Secret for session cookies and CSRF tokens. */
  sessionSecret: string;
  version: string;
}

export const consoleLogger: Logger = {
  info: (message) => console.log(message),
  error: (error) => console.error(error),
};
