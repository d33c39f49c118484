/**
 * Run a private PostgreSQL cluster from Debian's server binaries: find them, create a cluster,
 * start it on 127.0.0.1 with its socket inside the data folder, and stop it.
 * PostgreSQL refuses to run as root, so as root every command goes through `runuser -u postgres --`
 * with the data folder owned by postgres and the working directory inside it.
 */
import { spawn } from 'node:child_process';
import { chownSync, existsSync, mkdirSync, readdirSync, readFileSync } from 'node:fs';
import net from 'node:net';
import path from 'node:path';

export interface PostgresBinaries {
  binDir: string;
  initdb: string;
  pgCtl: string;
  version: number;
}

/** The newest /usr/lib/postgresql/<version>/bin holding initdb and pg_ctl, or null. */
export function findPostgresBinaries(root = '/usr/lib/postgresql'): PostgresBinaries | null {
  if (!existsSync(root)) return null;
  const versions = readdirSync(root)
    .filter((name) => /^\d+$/.test(name))
    .map(Number)
    .sort((a, b) => b - a);
  for (const version of versions) {
    const binDir = path.join(root, String(version), 'bin');
    const initdb = path.join(binDir, 'initdb');
    const pgCtl = path.join(binDir, 'pg_ctl');
    if (existsSync(initdb) && existsSync(pgCtl)) return { binDir, initdb, pgCtl, version };
  }
  return null;
}

export const runningAsRoot = (): boolean => typeof process.getuid === 'function' && process.getuid() === 0;

interface RunResult {
  code: number;
  output: string;
}

/** Runs a PostgreSQL tool, as the postgres system user when we are root. Rejects with its output on failure. */
export function runPostgresTool(command: string, args: string[], cwd: string): Promise<RunResult> {
  const [file, fileArgs] = runningAsRoot()
    ? ['runuser', ['-u', 'postgres', '--', command, ...args]]
    : [command, args];
  return new Promise((resolve, reject) => {
    const child = spawn(file, fileArgs, { cwd, stdio: ['ignore', 'pipe', 'pipe'] });
    let output = '';
    child.stdout.on('data', (chunk: Buffer) => (output += chunk.toString()));
    child.stderr.on('data', (chunk: Buffer) => (output += chunk.toString()));
    child.on('error', reject);
    child.on('close', (code) => {
      if (code === 0) resolve({ code, output });
      else
        reject(
          new Error(`${path.basename(command)} ${args.join(' ')} failed (exit ${code}):\n${output.trim()}`),
        );
    });
  });
}

export interface ClusterOptions {
  binaries: PostgresBinaries;
  /** Folder holding the cluster (PGDATA); created when missing. */
  dataDir: string;
  port: number;
  /** Throwaway clusters: fsync, synchronous_commit and full_page_writes off (never for real data). */
  throwaway?: boolean;
}

/** Creates the folder (owned by postgres when root) if needed. */
function prepareFolder(folder: string): void {
  mkdirSync(folder, { recursive: true, mode: 0o700 });
  if (runningAsRoot()) {
    const { uid, gid } = postgresUserIds();
    chownSync(folder, uid, gid);
  }
}

let cachedPostgresIds: { uid: number; gid: number } | undefined;
/** uid and gid of the postgres system user (from /etc/passwd: name:x:uid:gid:…). */
function postgresUserIds(): { uid: number; gid: number } {
  if (cachedPostgresIds) return cachedPostgresIds;
  const line = readFileSync('/etc/passwd', 'utf8')
    .split('\n')
    .find((entry) => entry.startsWith('postgres:'));
  if (!line) throw new Error("The postgres system user is missing; reinstall Debian's postgresql package.");
  const fields = line.split(':');
  cachedPostgresIds = { uid: Number(fields[2]), gid: Number(fields[3]) };
  return cachedPostgresIds;
}

/** True when dataDir already holds an initialised cluster. */
export function clusterExists(dataDir: string): boolean {
  return existsSync(path.join(dataDir, 'PG_VERSION'));
}

/** initdb with superuser `postgres`, UTF-8, C locale. */
export async function initCluster(options: ClusterOptions): Promise<void> {
  const dataDir = path.resolve(options.dataDir);
  prepareFolder(dataDir);
  const args = ['-D', dataDir, '-U', 'postgres', '-E', 'UTF8', '--locale=C'];
  if (options.throwaway) {
    args.push('-A', 'trust', '--no-sync');
  } else {
    // The socket lives inside the 0700 data folder, so only its owner (and root) reach it: trust there.
    // TCP on 127.0.0.1 needs a password (scram-sha-256): that is how the app connects.
    args.push('--auth-local=trust', '--auth-host=scram-sha-256');
  }
  await runPostgresTool(options.binaries.initdb, args, dataDir);
}

/** Starts the cluster on 127.0.0.1:port with the socket inside dataDir; waits until it accepts connections. */
export async function startCluster(options: ClusterOptions): Promise<void> {
  const dataDir = path.resolve(options.dataDir);
  const serverOptions = [
    '-c listen_addresses=127.0.0.1',
    `-p ${options.port}`,
    `-k ${dataDir}`,
    ...(options.throwaway ? ['-c fsync=off', '-c synchronous_commit=off', '-c full_page_writes=off'] : []),
  ].join(' ');
  await runPostgresTool(
    options.binaries.pgCtl,
    ['-D', dataDir, '-w', '-t', '60', '-l', path.join(dataDir, 'server.log'), '-o', serverOptions, 'start'],
    dataDir,
  );
}

/** Fast shutdown (rolls back open transactions, closes connections); no error when it is not running. */
export async function stopCluster(options: Pick<ClusterOptions, 'binaries' | 'dataDir'>): Promise<void> {
  const dataDir = path.resolve(options.dataDir);
  if (!existsSync(path.join(dataDir, 'postmaster.pid'))) return;
  await runPostgresTool(
    options.binaries.pgCtl,
    ['-D', dataDir, '-m', 'fast', '-w', '-t', '60', 'stop'],
    dataDir,
  );
}

/** A TCP port on 127.0.0.1 that nothing listens on right now. */
export function findFreePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = net.createServer();
    server.unref();
    server.on('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      server.close(() => {
        if (address && typeof address === 'object') resolve(address.port);
        else reject(new Error('Could not find a free port.'));
      });
    });
  });
}

/** True when something accepts TCP connections on 127.0.0.1:port. */
export function portIsOpen(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = net.connect({ host: '127.0.0.1', port });
    socket.once('connect', () => {
      socket.destroy();
      resolve(true);
    });
    socket.once('error', () => resolve(false));
  });
}

/** Connection string for the cluster's superuser through its Unix socket in the data folder. */
export function superuserSocketUrl(dataDir: string, port: number, database = 'postgres'): string {
  return `postgresql://postgres@/${database}?host=${encodeURIComponent(path.resolve(dataDir))}&port=${port}`;
}
