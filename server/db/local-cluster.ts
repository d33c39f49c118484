/**
 * The persistent development cluster of `npm start`: created once in <dataDir>/pg, started on
 * 127.0.0.1:<PGPORT>, with a password-protected app role and database (password generated once and
 * kept in <dataDir>/db-password).
 */
import { randomBytes } from 'node:crypto';
import { chmodSync, existsSync, mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';

import { appDatabaseUrl, ensureAppDatabase } from './provision';
import {
  clusterExists,
  initCluster,
  portIsOpen,
  type PostgresBinaries,
  startCluster,
  stopCluster,
  superuserSocketUrl,
} from './postgres-cluster';

/** Reads a secret file, or creates it with fresh random content (mode 0600). */
export function readOrCreateSecret(file: string, bytes = 24): string {
  if (existsSync(file)) {
    const value = readFileSync(file, 'utf8').trim();
    if (value.length >= 16) return value;
  }
  const value = randomBytes(bytes).toString('base64url');
  writeFileSync(file, `${value}\n`, { mode: 0o600 });
  return value;
}

export interface LocalCluster {
  databaseUrl: string;
  /** Whether this process started the server; false when it found the cluster already running (adopted). */
  startedHere: boolean;
  created: boolean;
  stop(): Promise<void>;
}

export async function startLocalCluster(
  binaries: PostgresBinaries,
  dataRoot: string,
  port: number,
): Promise<LocalCluster> {
  const root = path.resolve(dataRoot);
  // The postgres user must be able to pass through to root/pg; the secrets themselves are 0600.
  mkdirSync(root, { recursive: true });
  chmodSync(root, 0o711);
  const pgDir = path.join(root, 'pg');
  let created = false;
  if (!clusterExists(pgDir)) {
    if (existsSync(pgDir) && readdirSync(pgDir).length > 0) {
      throw new Error(`${pgDir} exists but holds no PostgreSQL cluster. Move it away and start again.`);
    }
    await initCluster({ binaries, dataDir: pgDir, port });
    created = true;
  }
  let startedHere = false;
  const pidFile = path.join(pgDir, 'postmaster.pid');
  if (existsSync(pidFile) && (await portIsOpen(port))) {
    // Left running by an earlier start that did not stop cleanly: adopt it (stop() stops it too).
  } else {
    if (await portIsOpen(port)) {
      throw new Error(`Port ${port} on 127.0.0.1 is taken by another program. Set PGPORT to a free port.`);
    }
    await startCluster({ binaries, dataDir: pgDir, port });
    startedHere = true;
  }
  const password = readOrCreateSecret(path.join(root, 'db-password'));
  const app = { role: 'skysieve', database: 'skysieve', password };
  const stop = () => stopCluster({ binaries, dataDir: pgDir });
  try {
    await ensureAppDatabase(superuserSocketUrl(pgDir, port), app);
  } catch (error) {
    if (startedHere) await stop().catch(() => undefined);
    throw error;
  }
  return { databaseUrl: appDatabaseUrl(app, port), startedHere, created, stop };
}
