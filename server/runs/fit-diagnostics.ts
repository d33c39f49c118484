/**
 * What a run records besides its planes and sources: a progress estimate while the fit runs, and once it is
 * done the diagnostics (normalised-residual histogram, diffuse power spectrum with the fitted law, convergence
 * trace). Pure functions over the engine's result.
 */
import type { RunDiagnostics, RunProgress } from '../../shared/runs';
import { resolveSettings } from '../../shared/separation-settings';
import type { SeparationProgress, SeparationResult } from '../engine/separate';

/** Share of the work given to the catalogue after the fit (a rough figure; common practice for progress bars). */
const CATALOGUE_SHARE = 0.1;

/**
 * Progress from the stage sequence of the staged fit (two diffuse stages and one joint stage per seeding round
 * with a third of the budget each, then the final stage with the full budget; server/engine/fit/staged-fit.ts).
 * A stage ends early when it converges, so the fraction jumps forward at stage changes; it never goes back.
 */
export function progressEstimator(settingsInput: unknown): (p: SeparationProgress) => RunProgress {
  const settings = resolveSettings(settingsInput);
  const early = Math.max(1, Math.round(settings.maxIterations / 3));
  const budgets = [
    early,
    early,
    ...Array.from({ length: settings.seedRounds }, () => early),
    settings.maxIterations,
  ];
  const total = budgets.reduce((a, b) => a + b, 0);
  let stageIndex = 0;
  let lastStage = '';
  let lastIteration = -1;
  let best = 0;
  return (p) => {
    if (lastStage !== '' && (p.stage !== lastStage || p.iteration < lastIteration)) {
      stageIndex = Math.min(stageIndex + 1, budgets.length - 1);
    }
    lastStage = p.stage;
    lastIteration = p.iteration;
    let fraction: number;
    if (p.phase === 'catalogue') fraction = 1 - CATALOGUE_SHARE;
    else {
      const done = budgets.slice(0, stageIndex).reduce((a, b) => a + b, 0);
      const within = Math.min(p.iteration, budgets[stageIndex]!);
      fraction = ((done + within) / total) * (1 - CATALOGUE_SHARE);
    }
    best = Math.max(best, Math.min(1, fraction));
    return {
      phase: p.phase,
      stage: p.stage,
      iteration: p.iteration,
      objective: Number.isFinite(p.objective) ? p.objective : 0,
      gradNorm: Number.isFinite(p.gradNorm) ? p.gradNorm : 0,
      fraction: best,
    };
  };
}

/** Histogram bin edges of (data − model)/σ: −6 … 6 in steps of 0.25 (values beyond land in the end bins). */
export const RESIDUAL_EDGES = Array.from({ length: 49 }, (_, i) => -6 + i * 0.25);

export function residualHistogram(residualNorm: Float32Array): RunDiagnostics['residualHistogram'] {
  const counts = new Array<number>(RESIDUAL_EDGES.length - 1).fill(0);
  let n = 0;
  let sum = 0;
  let sumSquares = 0;
  const last = counts.length - 1;
  for (const v of residualNorm) {
    if (!Number.isFinite(v)) continue;
    n++;
    sum += v;
    sumSquares += v * v;
    const bin = Math.min(last, Math.max(0, Math.floor((v + 6) / 0.25)));
    counts[bin]!++;
  }
  const mean = n > 0 ? sum / n : null;
  const std =
    n > 1 && mean !== null ? Math.sqrt(Math.max(0, (sumSquares - n * mean * mean) / (n - 1))) : null;
  return { edges: RESIDUAL_EDGES, counts, mean, std, count: n };
}

/** At most `limit` points of the trace, evenly thinned, always keeping each stage's last iteration. */
export function thinTrace(trace: SeparationResult['trace'], limit = 2000): RunDiagnostics['convergence'] {
  if (trace.length <= limit) return trace.map((t) => ({ ...t }));
  const step = Math.ceil(trace.length / limit);
  return trace.filter((t, i) => i % step === 0 || trace[i + 1]?.stage !== t.stage).map((t) => ({ ...t }));
}

export function buildDiagnostics(result: SeparationResult): RunDiagnostics {
  const { amplitude, slope, turnover, estimated, binned } = result.spectrum;
  // The fitted law of the diffuse spectrum (server/engine/fit/spectrum.ts, powerLawSpectrum).
  const fitted = binned.k.map((k) => amplitude * Math.pow(k * k + turnover * turnover, -slope / 2));
  return {
    residualHistogram: residualHistogram(result.residualNorm),
    spectrum: {
      k: binned.k,
      power: binned.power,
      mapPower: binned.mapPower,
      modes: binned.modes,
      fitted,
      amplitude,
      slope,
      turnover,
      estimated,
    },
    convergence: thinTrace(result.trace),
    converged: result.converged,
    iterations: result.iterations,
    evaluations: result.evaluations,
    noise: { sigma: result.sigma, source: result.sigmaSource },
    psfFwhmPx: result.psfFwhmPx,
    beamAreaPx: result.beamAreaPx,
    compactPrior: result.compactPrior,
  };
}
