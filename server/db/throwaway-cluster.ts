/** A throwaway PostgreSQL cluster in a fresh temp folder on a free loopback port (tests, `npm test`). */
import { mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';

import {
  findFreePort,
  findPostgresBinaries,
  initCluster,
  type PostgresBinaries,
  startCluster,
  stopCluster,
} from './postgres-cluster';

export interface ThrowawayCluster {
  dataDir: string;
  port: number;
  binaries: PostgresBinaries;
  /** Superuser (postgres, trust auth) URL of database `database` over TCP on 127.0.0.1. */
  url(database?: string): string;
  /** Stops the server and removes the folder; safe to call twice. */
  destroy(): Promise<void>;
}

export const missingPostgresMessage =
  "PostgreSQL server binaries were not found in /usr/lib/postgresql/*/bin. Install Debian's package: sudo apt-get install -y postgresql";

export async function createThrowawayCluster(prefix = 'skysieve-pg-'): Promise<ThrowawayCluster> {
  const binaries = findPostgresBinaries();
  if (!binaries) throw new Error(missingPostgresMessage);
  const dataDir = mkdtempSync(path.join(os.tmpdir(), prefix));
  let destroyed = false;
  const destroy = async () => {
    if (destroyed) return;
    destroyed = true;
    try {
      await stopCluster({ binaries, dataDir });
    } finally {
      rmSync(dataDir, { recursive: true, force: true });
    }
  };
  try {
    await initCluster({ binaries, dataDir, port: 0, throwaway: true });
    // A port found free can be taken before the server binds it: try a few.
    let port = 0;
    for (let attempt = 0; ; attempt++) {
      port = await findFreePort();
      try {
        await startCluster({ binaries, dataDir, port, throwaway: true });
        break;
      } catch (error) {
        if (attempt >= 3) throw error;
      }
    }
    return {
      dataDir,
      port,
      binaries,
      url: (database = 'postgres') => `postgresql://postgres@127.0.0.1:${port}/${database}`,
      destroy,
    };
  } catch (error) {
    await destroy().catch(() => undefined);
    throw error;
  }
}
