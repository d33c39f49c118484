/**
 * npm test: a throwaway PostgreSQL in a temp folder on a free loopback port, a migrated template
 * database, then every vitest project (client, node, e2e as vite.config.ts defines them).
 * The cluster is stopped and removed whatever happens (failure, Ctrl-C). Extra arguments go to vitest,
 * e.g. `npm test -- tests/server/auth.test.ts`.
 *
 * Test files get: DATABASE_URL (a migrated database of their own to share), SKYSIEVE_TEST_POSTGRES_URL
 * (superuser URL) and SKYSIEVE_TEST_TEMPLATE_DATABASE (a migrated template for CREATE DATABASE … TEMPLATE);
 * tests/support/test-database.ts uses them.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';

import pg from 'pg';

import { createKnex, migrateLatest } from '../server/db/knex';
import { createThrowawayCluster, type ThrowawayCluster } from '../server/db/throwaway-cluster';

const templateDatabase = 'skysieve_template';
const sharedDatabase = 'skysieve_test';
const started = Date.now();
const seconds = () => ((Date.now() - started) / 1000).toFixed(1);

let cluster: ThrowawayCluster | undefined;
let reportFile: string | undefined;
let child: ChildProcess | undefined;
let cleaning: Promise<void> | undefined;

function cleanUp(): Promise<void> {
  cleaning ??= (async () => {
    if (cluster) {
      try {
        await cluster.destroy();
        console.log(`[test] PostgreSQL stopped and ${cluster.dataDir} removed.`);
      } catch (error) {
        console.error(`[test] Could not stop or remove the test cluster in ${cluster.dataDir}:`, error);
      }
    }
  })();
  return cleaning;
}

for (const signal of ['SIGINT', 'SIGTERM'] as const) {
  process.on(signal, () => {
    console.log(`\n[test] ${signal}: stopping tests and the test database…`);
    child?.kill(signal);
    void cleanUp().then(() => process.exit(130));
  });
}

async function createDatabase(url: string, name: string, template?: string): Promise<void> {
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  try {
    await client.query(`create database ${name}${template ? ` template ${template}` : ''}`);
  } finally {
    await client.end();
  }
}

async function main(): Promise<number> {
  cluster = await createThrowawayCluster('skysieve-test-pg-');
  console.log(
    `[test] PostgreSQL ${cluster.binaries.version} on 127.0.0.1:${cluster.port} in ${cluster.dataDir} (${seconds()} s)`,
  );
  await createDatabase(cluster.url(), templateDatabase);
  const knex = createKnex(cluster.url(templateDatabase), { min: 0, max: 1 });
  try {
    const applied = await migrateLatest(knex);
    console.log(`[test] ${applied.length} migrations applied to the template database (${seconds()} s)`);
  } finally {
    await knex.destroy();
  }
  await createDatabase(cluster.url(), sharedDatabase, templateDatabase);

  const env = {
    ...process.env,
    DATABASE_URL: cluster.url(sharedDatabase),
    SKYSIEVE_TEST_POSTGRES_URL: cluster.url(),
    SKYSIEVE_TEST_TEMPLATE_DATABASE: templateDatabase,
  };
  const extra = process.argv.slice(2);
  // Unless the caller picks reporters, also write vitest's JSON report for the summary below.
  const reportDir = mkdtempSync(path.join(os.tmpdir(), 'skysieve-test-report-'));
  reportFile = path.join(reportDir, 'report.json');
  const reporters = extra.some((arg) => arg.startsWith('--reporter'))
    ? []
    : ['--reporter=default', '--reporter=json', `--outputFile.json=${reportFile}`];
  const args = ['vitest', 'run', ...reporters, ...extra];
  console.log(`[test] npx ${args.join(' ')}`);
  const code = await new Promise<number>((resolve) => {
    child = spawn('npx', args, { stdio: 'inherit', env });
    child.on('error', (error) => {
      console.error('[test] Could not run vitest:', error);
      resolve(1);
    });
    child.on('close', (exitCode, signal) => resolve(exitCode ?? (signal ? 1 : 0)));
  });
  return code;
}

interface JsonReport {
  numTotalTests: number;
  numPassedTests: number;
  numFailedTests: number;
  numPendingTests: number;
  numTodoTests?: number;
  testResults: { name: string; status: string; assertionResults: { status: string }[] }[];
}

/** Per test folder (tests/server, tests/client, …): files and tests passed / failed / skipped. */
function printSummary(): void {
  if (!reportFile || !existsSync(reportFile)) return;
  try {
    const report = JSON.parse(readFileSync(reportFile, 'utf8')) as JsonReport;
    const groups = new Map<
      string,
      { files: number; failedFiles: number; passed: number; failed: number; skipped: number }
    >();
    for (const file of report.testResults) {
      const relative = path.relative(process.cwd(), file.name);
      const group = relative.split(path.sep).slice(0, 2).join('/');
      const entry = groups.get(group) ?? { files: 0, failedFiles: 0, passed: 0, failed: 0, skipped: 0 };
      entry.files++;
      if (file.status !== 'passed') entry.failedFiles++;
      for (const test of file.assertionResults) {
        if (test.status === 'passed') entry.passed++;
        else if (test.status === 'failed') entry.failed++;
        else entry.skipped++;
      }
      groups.set(group, entry);
    }
    console.log('\n[test] Summary');
    for (const [group, entry] of [...groups].sort()) {
      console.log(
        `  ${group.padEnd(18)} ${String(entry.files).padStart(3)} files (${entry.failedFiles} failed)  ${String(entry.passed).padStart(4)} passed  ${String(entry.failed).padStart(3)} failed  ${String(entry.skipped).padStart(3)} skipped`,
      );
    }
    console.log(
      `  ${'all'.padEnd(18)} ${String(report.testResults.length).padStart(3)} files              ${String(report.numPassedTests).padStart(4)} passed  ${String(report.numFailedTests).padStart(3)} failed  ${String(report.numPendingTests + (report.numTodoTests ?? 0)).padStart(3)} skipped`,
    );
  } catch (error) {
    console.log(
      '[test] (no summary: could not read the vitest JSON report)',
      error instanceof Error ? error.message : error,
    );
  } finally {
    rmSync(path.dirname(reportFile), { recursive: true, force: true });
  }
}

let exitCode = 1;
try {
  exitCode = await main();
} catch (error) {
  console.error(
    '[test] Setting up the test database failed:',
    error instanceof Error ? error.message : error,
  );
} finally {
  await cleanUp();
}
printSummary();
console.log(
  exitCode === 0
    ? `[test] PASSED: every suite passed (${seconds()} s).`
    : `[test] FAILED: exit code ${exitCode} (${seconds()} s). See the vitest output above.`,
);
process.exit(exitCode);
