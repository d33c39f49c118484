/**
 * One size of the separation bench, run in its own process (server/bench/index.ts starts it) so that peak memory
 * and JIT state belong to this size alone. Prints one JSON line on stdout:
 *   npx tsx server/bench/separate-one.ts SIZE REPEAT
 * The sky: samples/sky-simulator.ts, SIZE × SIZE, circular 3.5-pixel PSF, log-normal diffuse emission at ~5σ,
 * one point source per 2000 pixels from SNR 3 to 300, Gaussian noise, fixed seed.
 */
import { createRealFft2d, supportsFloat32 } from '../engine/fft';
import { separate, type SeparationResult } from '../engine/separate';
import { isolatedFluxError, type SkySimulationOptions } from '../../samples/sky-simulator';
import { startTypeScriptWorker } from '../engine/threads/start-typescript-worker';
import { psfFromFwhm } from '../engine/psf';
import { MemorySampler } from './memory-sampler';
import { median, nowMs } from './stats';
import { timeFftPair } from './fft';

export interface SeparationBenchRow {
  size: number;
  repeat: number;
  paddedWidth: number;
  paddedHeight: number;
  wallSeconds: number[];
  fitSeconds: number[];
  iterations: number;
  evaluations: number;
  /** Evaluations of the coarse start and their cost share: its padded pixels / the fine padded pixels. */
  coarseEvaluations: number;
  coarseShare: number;
  sources: number;
  converged: boolean;
  fftImplementation: string;
  /** Median over the runs of the pair timed right after each. */
  fftPairMs: number;
  /** Per run: its fit time / equivalent evaluations / the pair timed right after it. */
  pairsPerEvaluationByRun: number[];
  peakRssBytes: number;
  maxRssBytes: number;
  baselineRssBytes: number;
}

const size = Number(process.argv[2]);
const repeat = Number(process.argv[3] ?? 1);
if (!Number.isInteger(size) || size < 16 || !Number.isInteger(repeat) || repeat < 1) {
  process.stderr.write('usage: separate-one.ts SIZE REPEAT\n');
  process.exit(1);
}

const sampler = new MemorySampler();
const sigma = 1;
const fwhm = 3.5;
const fluxError = isolatedFluxError(psfFromFwhm(fwhm, fwhm, 0), sigma);
// The sky is simulated in a worker thread (simulate-worker.ts): only its image and mask come back, so the peak
// memory below is that of separating one image held by its caller, not of the simulator's planes and garbage.
const skyOptions: SkySimulationOptions = {
  width: size,
  height: size,
  seed: 4242 + size,
  psf: { fwhmMajorPx: fwhm, fwhmMinorPx: fwhm, paDeg: 0 },
  diffuse: { level: 5 * sigma, logStd: 0.8, slope: 3.5 },
  sources: { count: Math.round((size * size) / 2000), minFlux: 3 * fluxError, maxFlux: 300 * fluxError },
  noise: { kind: 'gaussian', sigma },
  wcs: { projection: 'TAN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
  unit: 'Jy/beam',
};
const { image: skyImage, mask: skyMask } = await new Promise<{ image: Float32Array; mask: Uint8Array }>(
  (resolve, reject) => {
    const worker = startTypeScriptWorker(new URL('./simulate-worker.ts', import.meta.url), {
      workerData: skyOptions,
    });
    // resolved once the worker has ended, so that its heap is gone before the baseline below is read
    worker.once('message', (sky: { image: Float32Array; mask: Uint8Array }) => {
      worker.terminate().then(() => resolve(sky), reject);
    });
    worker.once('error', reject);
  },
);
const image = { width: size, height: size, data: skyImage, mask: skyMask, unit: 'Jy/beam' };
// RSS with the image in memory, before the first fit (the separation's own share is the peak minus this).
const baselineRssBytes = process.memoryUsage().rss;
// The peak counts from here: the simulation before (in the worker, same process) is not the separation's.
// maxRSS below is the kernel's high-water mark over the process's whole life and includes it.
sampler.reset();
const settings = { psf: { fwhmMajor: fwhm, fwhmMinor: fwhm, pa: 0 } };

const wall: number[] = [];
const fit: number[] = [];
let last: Awaited<ReturnType<typeof separate>> | null = null;
let peakRssBytes = 0;
let maxRssBytes = 0;
// The FFT pair at the padded size with the transform the fit uses (float32 PFFFT where the grid allows it,
// staged-fit.ts `precision`), timed in this process right after every separation: this machine's speed drifts
// by tens of per cent within minutes, so each run's time per evaluation is divided by a pair of its own moment
// (about 0.2 s of pairs at 256² and 2 s from 512² up).
const pairMs: number[] = [];
const pairsPerEvaluationByRun: number[] = [];
let fftImplementation = '';
/** Objective evaluations in fine-grid units: the coarse start's count as their share of the padded pixels. */
const coarseShareOf = (r: SeparationResult): number =>
  r.coarseStart
    ? (r.coarseStart.paddedSize.width * r.coarseStart.paddedSize.height) /
      (r.paddedSize.width * r.paddedSize.height)
    : 0;
const equivalentEvaluations = (r: SeparationResult): number =>
  r.evaluations + (r.coarseStart?.evaluations ?? 0) * coarseShareOf(r);
for (let i = 0; i < repeat; i++) {
  const t0 = nowMs();
  last = await separate(image, settings);
  wall.push((nowMs() - t0) / 1000);
  fit.push(last.timings.fit / 1000);
  if (i === 0) {
    // the separation's peak, read before the FFT pair allocates its own spectra
    peakRssBytes = sampler.peakBytes;
    maxRssBytes = process.resourceUsage().maxRSS * 1024;
  }
  const { width: pw, height: ph } = last.paddedSize;
  const fft = createRealFft2d(pw, ph, { precision: supportsFloat32(pw, ph) ? 'float32' : 'float64' });
  const pair = timeFftPair(fft, Math.max(5, Math.min(100, Math.round(3e7 / (size * size)))));
  fftImplementation = fft.implementation;
  fft.dispose();
  pairMs.push(pair.medianMs);
  pairsPerEvaluationByRun.push(last.timings.fit / equivalentEvaluations(last) / pair.medianMs);
}
const result = last!;
const row: SeparationBenchRow = {
  size,
  repeat,
  paddedWidth: result.paddedSize.width,
  paddedHeight: result.paddedSize.height,
  wallSeconds: wall,
  fitSeconds: fit,
  iterations: result.iterations,
  evaluations: result.evaluations,
  coarseEvaluations: result.coarseStart?.evaluations ?? 0,
  coarseShare: coarseShareOf(result),
  sources: result.catalogue.length,
  converged: result.converged,
  fftImplementation,
  fftPairMs: median(pairMs),
  pairsPerEvaluationByRun,
  peakRssBytes,
  maxRssBytes,
  baselineRssBytes,
};
await sampler.stop();
process.stdout.write(`${JSON.stringify(row)}\n`);
