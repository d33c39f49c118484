/**
 * FFT bench: milliseconds per 2-D real forward + inverse pair, median of `repeat` runs after two warm-up pairs,
 * for each candidate and size, with the ratio to the SciPy reference of ../shared/STACK.md (scipy.fft with 2
 * workers on this machine: 8.6 ms at 1024², 65 ms at 2048²; reference numbers, not measured in this run).
 * Each candidate's spectrum is checked against the float64 engine transform before it is timed.
 */
import { createRealFft2d, type RealFft2d, type RealFft2dOptions } from '../engine/fft';
import { FftJsRealFft2d } from './fftjs-2d';
import { formatMs, median, nowMs } from './stats';

export interface FftCandidate {
  name: string;
  precision: 'float64' | 'float32';
  threads: number;
  create(width: number, height: number): RealFft2d;
  accepts(width: number, height: number): boolean;
}

export interface FftBenchRow {
  candidate: string;
  precision: string;
  threads: number;
  width: number;
  height: number;
  medianMs: number;
  minMs: number;
  /** Largest |difference| from the float64 engine spectrum divided by the largest |F|. */
  relativeError: number;
}

const SCIPY_REFERENCE_MS: Record<number, number> = { 1024: 8.6, 2048: 65 };

const isPowerOfTwo = (n: number) => n >= 4 && (n & (n - 1)) === 0;
const pffftAccepts = (w: number, h: number) => {
  try {
    createRealFft2d(w, h, { precision: 'float32' }).dispose();
    return true;
  } catch {
    return false;
  }
};

function engine(options: RealFft2dOptions, name: string): FftCandidate {
  return {
    name,
    precision: options.precision ?? 'float64',
    threads: options.threads ?? 1,
    create: (w, h) => createRealFft2d(w, h, options),
    accepts: (w, h) => (options.precision === 'float32' ? pffftAccepts(w, h) : true),
  };
}

export const FFT_CANDIDATES: FftCandidate[] = [
  engine({ precision: 'float32', threads: 2 }, 'pffft-wasm (SIMD) float32, 2 threads'),
  engine({ precision: 'float32', threads: 1 }, 'pffft-wasm (SIMD) float32, 1 thread'),
  engine({ precision: 'float64', threads: 2 }, 'TypeScript mixed radix float64, 2 threads'),
  engine({ precision: 'float64', threads: 1 }, 'TypeScript mixed radix float64, 1 thread'),
  {
    name: 'fft.js float64 (rows packed in pairs), 1 thread',
    precision: 'float64',
    threads: 1,
    create: (w, h) => new FftJsRealFft2d(w, h),
    accepts: (w, h) => isPowerOfTwo(w) && isPowerOfTwo(h),
  },
];

function randomImage(n: number, seed: number): Float64Array {
  let a = seed >>> 0;
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    a = (Math.imul(a, 1664525) + 1013904223) >>> 0;
    out[i] = 100 + a / 4294967296;
  }
  return out;
}

/** Median ms per forward + inverse pair of one transform object (after two warm-up pairs). */
export function timeFftPair(fft: RealFft2d, repeat: number): { medianMs: number; minMs: number } {
  const n = fft.width * fft.height;
  const input = randomImage(n, 12345);
  const re = new Float64Array(fft.spectrumWidth * fft.height);
  const im = new Float64Array(fft.spectrumWidth * fft.height);
  const output = new Float64Array(n);
  for (let i = 0; i < 2; i++) {
    fft.forward(input, re, im);
    fft.inverse(re, im, output);
  }
  const times: number[] = [];
  for (let i = 0; i < repeat; i++) {
    const t0 = nowMs();
    fft.forward(input, re, im);
    fft.inverse(re, im, output);
    times.push(nowMs() - t0);
  }
  return { medianMs: median(times), minMs: Math.min(...times) };
}

function spectrumError(
  fft: RealFft2d,
  reference: { re: Float64Array; im: Float64Array },
  input: Float64Array,
) {
  const re = new Float64Array(reference.re.length);
  const im = new Float64Array(reference.re.length);
  fft.forward(input, re, im);
  let maxDiff = 0;
  let maxValue = 0;
  // k = (0, 0) is left out of the scale: the image's pedestal would hide every other error behind it.
  for (let i = 0; i < re.length; i++) {
    maxDiff = Math.max(maxDiff, Math.hypot(re[i]! - reference.re[i]!, im[i]! - reference.im[i]!));
    if (i > 0) maxValue = Math.max(maxValue, Math.hypot(reference.re[i]!, reference.im[i]!));
  }
  return maxDiff / maxValue;
}

export async function benchFft(
  sizes: readonly number[],
  repeat: number,
  log: (line: string) => void,
): Promise<FftBenchRow[]> {
  const rows: FftBenchRow[] = [];
  for (const size of sizes) {
    const input = randomImage(size * size, 999);
    const referenceFft = createRealFft2d(size, size);
    const reference = {
      re: new Float64Array(referenceFft.spectrumWidth * size),
      im: new Float64Array(referenceFft.spectrumWidth * size),
    };
    referenceFft.forward(input, reference.re, reference.im);
    referenceFft.dispose();
    for (const candidate of FFT_CANDIDATES) {
      if (!candidate.accepts(size, size)) continue;
      const fft = candidate.create(size, size);
      try {
        if (!(await fft.whenReady())) log(`  ${candidate.name}: worker did not start, timed on one thread`);
        const relativeError = spectrumError(fft, reference, input);
        const { medianMs, minMs } = timeFftPair(fft, repeat);
        rows.push({
          candidate: candidate.name,
          precision: candidate.precision,
          threads: candidate.threads,
          width: size,
          height: size,
          medianMs,
          minMs,
          relativeError,
        });
        log(`  fft ${size}² ${candidate.name}: ${formatMs(medianMs)} ms`);
      } finally {
        fft.dispose();
      }
    }
  }
  return rows;
}

export function fftTable(rows: readonly FftBenchRow[], repeat: number): string {
  const lines = [
    `FFT: one 2-D real forward + inverse pair, median of ${repeat} runs (ms); ratio = median / SciPy reference`,
    '(scipy.fft, 2 workers, from ../shared/STACK.md: 8.6 ms at 1024², 65 ms at 2048²); error = max |F − F64| / max |F|',
    'over k ≠ 0 against the float64 engine transform, on an image of 100 + uniform[0, 1) noise.',
    '',
    '| size | implementation | ms per pair | min ms | ratio to SciPy | error |',
    '| --- | --- | --- | --- | --- | --- |',
  ];
  for (const row of rows) {
    const ref = row.width === row.height ? SCIPY_REFERENCE_MS[row.width] : undefined;
    const ratio = ref === undefined ? '–' : (row.medianMs / ref).toFixed(2);
    lines.push(
      `| ${row.width}×${row.height} | ${row.candidate} | ${formatMs(row.medianMs)} | ${formatMs(row.minMs)} | ${ratio} | ${row.relativeError.toExponential(1)} |`,
    );
  }
  return lines.join('\n');
}
