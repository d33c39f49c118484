/**
 * npm run bench [-- --sizes 256,512] [--repeat N] [--only fft|separate|load] [--large]
 *
 * 1. FFT table (server/bench/fft.ts): ms per 2-D real forward + inverse pair, median of N runs (default 7), for
 *    every candidate at 256², 512², 1024², 1280², 1536², 2048², 2560² (or --sizes).
 * 2. Separation table: the whole engine (server/engine/separate.ts) on synthetic skies from the sample generator
 *    at 256², 512², 1024², 2048² (or --sizes), each size in its own process (server/bench/separate-one.ts),
 *    3/3/2/1 repeats (1 from 2048² up; --repeat overrides). Time per evaluation is given in FFT pairs at the
 *    padded size, measured in the same process with the engine's default transform.
 *    Peak memory: RSS high-water mark sampled every 20 ms from a worker thread, and process.resourceUsage().maxRSS.
 * 3. --large: a 4096² separation that must finish under 3 GiB of RSS.
 * 4. Load (server/runs/load-bench.ts): the app on loopback, autocannon with 50 clients against catalogue pages
 *    and component views; p50/p95 latency and errors. Only with --only load (it starts its own PostgreSQL).
 * Targets (engine issue): ≤ 4 FFT pairs per evaluation; 1024² ≤ 30 s; 2048² ≤ 150 s; 4096² within 3 GiB.
 */
import { spawn } from 'node:child_process';
import { existsSync } from 'node:fs';
import { cpus, loadavg } from 'node:os';
import { fileURLToPath } from 'node:url';
import { benchFft, fftTable } from './fft';
import type { SeparationBenchRow } from './separate-one';
import { median } from './stats';

interface BenchArgs {
  sizes: number[] | null;
  repeat: number | null;
  only: 'fft' | 'separate' | 'load' | null;
  large: boolean;
}

function parseArgs(argv: string[]): BenchArgs {
  const args: BenchArgs = { sizes: null, repeat: null, only: null, large: false };
  for (let i = 0; i < argv.length; i++) {
    const flag = argv[i];
    const value = argv[i + 1];
    if (flag === '--large') args.large = true;
    else if (flag === '--sizes' && value) {
      args.sizes = value.split(',').map(Number);
      if (args.sizes.some((s) => !Number.isInteger(s) || s < 16))
        throw new Error(`--sizes needs whole numbers ≥ 16, got ${value}`);
      i++;
    } else if (flag === '--repeat' && value) {
      args.repeat = Number(value);
      if (!Number.isInteger(args.repeat) || args.repeat < 1)
        throw new Error(`--repeat needs a whole number ≥ 1, got ${value}`);
      i++;
    } else if (flag === '--only' && (value === 'fft' || value === 'separate' || value === 'load')) {
      args.only = value;
      i++;
    } else
      throw new Error(
        `unknown bench argument ${flag ?? ''}; use --sizes, --repeat, --only fft|separate|load, --large`,
      );
  }
  return args;
}

const GiB = 1024 ** 3;
const log = (line: string) => process.stderr.write(`${line}\n`);

/** Runs a bench script of the project in a child process with tsx, from the project root. */
function spawnBench(script: string, scriptArgs: string[], stdout: 'pipe' | 'inherit') {
  return spawn(process.execPath, ['--import', 'tsx', script, ...scriptArgs], {
    stdio: ['ignore', stdout, 'inherit'],
    // `--import tsx` resolves from the working directory: run in the project root.
    cwd: fileURLToPath(new URL('../..', import.meta.url)),
  });
}

function runLoadBench(): Promise<void> {
  const script = fileURLToPath(new URL('../runs/load-bench.ts', import.meta.url));
  return new Promise((resolve, reject) => {
    const child = spawnBench(script, [], 'inherit');
    child.on('error', reject);
    child.on('close', (code) =>
      code === 0 ? resolve() : reject(new Error(`load bench exited with code ${code}`)),
    );
  });
}

function runOneSize(size: number, repeat: number): Promise<SeparationBenchRow> {
  const script = fileURLToPath(new URL('./separate-one.ts', import.meta.url));
  return new Promise((resolve, reject) => {
    const child = spawnBench(script, [String(size), String(repeat)], 'pipe');
    let out = '';
    child.stdout?.on('data', (chunk: Buffer) => (out += chunk.toString()));
    child.on('error', reject);
    child.on('close', (code) => {
      if (code !== 0) reject(new Error(`separation bench at ${size}² exited with code ${code}`));
      else resolve(JSON.parse(out.trim().split('\n').pop()!) as SeparationBenchRow);
    });
  });
}

function separationTable(rows: readonly SeparationBenchRow[]): string {
  const lines = [
    'Whole separation (server/engine/separate.ts) on synthetic skies (samples/sky-simulator.ts, 3.5-pixel PSF,',
    'diffuse ~5σ, one source per 2000 pixels); each size in its own process. Time per evaluation = fit time /',
    'evaluations / (FFT pair at the padded size, timed right after each run, the transform the fit uses), median',
    'over the runs; the FFT pair column is the median of those pairs. Evaluations: on the',
    'padded grid + those of the coarse start on the 2×2-binned image; the latter count at their grid share',
    '(coarse padded pixels / padded pixels, about ¼) in the time per evaluation. Peak RSS: sampled from the',
    'start of the first separation (the sky is simulated before, in a worker); maxRSS: the whole process,',
    'simulation included.',
    '',
    '| image | padded | runs | median wall s | fit s | iterations | evaluations (+ coarse) | sources | converged | FFT pair ms | pairs per evaluation | RSS before the fit | peak RSS (sampled) | maxRSS |',
    '| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |',
  ];
  for (const r of rows) {
    const fit = median(r.fitSeconds);
    // the median over the runs of each run's own ratio (separate-one.ts times a pair right after every run)
    const pairsPerEvaluation = median(r.pairsPerEvaluationByRun);
    lines.push(
      `| ${r.size}² | ${r.paddedWidth}×${r.paddedHeight} | ${r.repeat} | ${median(r.wallSeconds).toFixed(1)} | ${fit.toFixed(1)} | ` +
        `${r.iterations} | ${r.evaluations} (+ ${r.coarseEvaluations}) | ${r.sources} | ${r.converged ? 'yes' : 'no'} | ${r.fftPairMs.toFixed(1)} (${r.fftImplementation}) | ` +
        `${pairsPerEvaluation.toFixed(1)} | ${(r.baselineRssBytes / GiB).toFixed(2)} GiB | ${(r.peakRssBytes / GiB).toFixed(2)} GiB | ${(r.maxRssBytes / GiB).toFixed(2)} GiB |`,
    );
  }
  return lines.join('\n');
}

async function main(): Promise<void> {
  const args = parseArgs(process.argv.slice(2));
  const separateExists = existsSync(fileURLToPath(new URL('../engine/separate.ts', import.meta.url)));
  const load = loadavg()
    .map((v) => v.toFixed(1))
    .join(', ');
  console.log(
    `# Skysieve bench (${new Date().toISOString()}, Node ${process.version}, ${cpus().length} cores)\n`,
  );
  console.log(
    `Load average at start (1, 5, 15 min): ${load}. Other processes on the machine inflate every time below.\n`,
  );
  if (args.only === 'load') {
    await runLoadBench();
    return;
  }
  if (args.only !== 'separate') {
    const repeat = Math.max(7, args.repeat ?? 7);
    const sizes = args.sizes ?? [256, 512, 1024, 1280, 1536, 2048, 2560];
    console.log(fftTable(await benchFft(sizes, repeat, log), repeat));
    console.log('');
  }
  if (args.only !== 'fft') {
    if (!separateExists) {
      console.log('Separation bench skipped: server/engine/separate.ts does not exist yet.');
      return;
    }
    const sizes = args.sizes ?? [256, 512, 1024, 2048];
    const rows: SeparationBenchRow[] = [];
    for (const size of sizes) {
      const repeat = args.repeat ?? (size <= 512 ? 3 : size <= 1024 ? 2 : 1);
      log(`  separation ${size}² × ${repeat} …`);
      rows.push(await runOneSize(size, repeat));
    }
    console.log(separationTable(rows));
    if (args.large) {
      log('  separation 4096² × 1 …');
      const large = await runOneSize(4096, 1);
      console.log('');
      console.log(separationTable([large]));
      const peak = large.peakRssBytes; // the separation's (maxRSS includes the simulation before it)
      console.log(
        `\n4096²: peak RSS ${(peak / GiB).toFixed(2)} GiB — ${peak < 3 * GiB ? 'within' : 'OVER'} the 3 GiB target.`,
      );
    }
  }
}

main().catch((error: unknown) => {
  process.stderr.write(`${error instanceof Error ? error.message : String(error)}\n`);
  process.exitCode = 1;
});
