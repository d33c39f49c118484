// @vitest-environment node
import normal from '@stdlib/stats-base-dists-normal';
import { describe, expect, it } from 'vitest';
import { expectClose as close } from './close-to';
import { psfFromFwhm, psfStamp, psfStampHalfSize } from '../../server/engine/psf';
import {
  completenessByLevel,
  falseSourceRate,
  fluxForSnr,
  injectSources,
  matchInjected,
  planInjections,
  wilsonInterval,
} from '../../server/catalogue/completeness';
import type { InjectedSource, InjectionOutcome } from '../../server/catalogue/completeness';
import { seededRandom } from '../../server/engine/random/mulberry32';

describe('Wilson score interval (Wilson 1927, JASA 22, 209)', () => {
  it('reproduces the published 95 % worked values', () => {
    // R. G. Newcombe, "Two-sided confidence intervals for the single proportion: comparison of seven methods",
    // Statistics in Medicine 17, 857 (1998), Table II, Wilson score method without continuity correction.
    // Values quoted from memory; each one also follows from the closed formula in completeness.ts.
    const z95 = 1.959963984540054;
    const cases: [number, number, number, number][] = [
      [81, 263, 0.2553, 0.3662],
      [15, 148, 0.0624, 0.1605],
      [0, 20, 0, 0.1611],
      [1, 29, 0.0061, 0.1718],
    ];
    for (const [k, n, low, high] of cases) {
      const interval = wilsonInterval(k, n, z95);
      close(interval.low, low, 5e-5, `${k}/${n} low`);
      close(interval.high, high, 5e-5, `${k}/${n} high`);
    }
  });

  it('refuses impossible counts', () => {
    expect(() => wilsonInterval(5, 3)).toThrow('Successes must be a whole number from 0 to 3 (got 5).');
    expect(() => wilsonInterval(0, 0)).toThrow('The number of trials must be a whole number ≥ 1 (got 0).');
  });
});

describe('injection plan', () => {
  const known = [
    { x: 50, y: 50 },
    { x: 20, y: 80 },
  ];
  const mask = new Uint8Array(100 * 100).fill(1);
  for (let y = 0; y < 100; y++) for (let x = 70; x < 100; x++) mask[y * 100 + x] = 0; // right 30 columns masked
  const options = {
    width: 100,
    height: 100,
    levels: [1, 10],
    perLevel: 25,
    maxPerRun: 10,
    seed: 42,
    knownSources: known,
    exclusionRadiusPixels: 8,
    edgeMarginPixels: 5,
    mask,
    maskClearancePixels: 4,
  };
  const plan = planInjections(options);

  it('is reproducible from its seed and changes with it', () => {
    expect(planInjections(options)).toEqual(plan);
    expect(planInjections({ ...options, seed: 43 })[0]!.truth[0]).not.toEqual(plan[0]!.truth[0]);
    const a = seededRandom(7);
    const b = seededRandom(7);
    expect([a(), a(), a()]).toEqual([b(), b(), b()]);
  });

  it('splits levels into runs and keeps every source clear of known sources, each other, edges and the mask', () => {
    // 25 per level in runs of at most 10 → 10 + 10 + 5 per level, 6 runs.
    expect(plan.map((run) => [run.level, run.truth.length])).toEqual([
      [0, 10],
      [0, 10],
      [0, 5],
      [1, 10],
      [1, 10],
      [1, 5],
    ]);
    for (const run of plan) {
      for (const [i, source] of run.truth.entries()) {
        expect(source.flux).toBe(options.levels[run.level]);
        for (const other of [...known, ...run.truth.slice(0, i)]) {
          expect(Math.hypot(source.x - other.x, source.y - other.y)).toBeGreaterThanOrEqual(8);
        }
        expect(source.x).toBeGreaterThanOrEqual(5.5);
        expect(source.x).toBeLessThanOrEqual(95.5);
        expect(source.y).toBeGreaterThanOrEqual(5.5);
        // Masked from 0-based column 70: the box of half-size 4 around round(x) − 1 must stay below it.
        expect(Math.round(source.x) - 1 + 4).toBeLessThan(70);
      }
    }
  });

  it('says clearly when the sources do not fit', () => {
    expect(() => planInjections({ ...options, perLevel: 200, maxPerRun: 200 })).toThrow(
      /^Could not place 200 artificial sources 8 pixels apart and away from the 2 known sources/,
    );
    expect(() => planInjections({ ...options, levels: [] })).toThrow('Give at least one flux level.');
  });
});

describe('injecting PSF-shaped sources', () => {
  const psf = psfFromFwhm(4, 3, 30);
  it('adds the flux with its centroid at the injected position, leaving masked pixels alone', () => {
    const width = 64;
    const height = 48;
    const image = new Float64Array(width * height).fill(0.25);
    const mask = new Uint8Array(width * height).fill(1);
    mask[5 * width + 5] = 0;
    const truth: InjectedSource[] = [{ x: 30.3, y: 20.7, flux: 12, level: 0 }];
    const out = injectSources(image, width, height, truth, psf, mask);
    let sum = 0;
    let sx = 0;
    let sy = 0;
    for (let j = 0; j < height; j++) {
      for (let i = 0; i < width; i++) {
        const added = out[j * width + i]! - 0.25;
        sum += added;
        sx += added * (i + 1);
        sy += added * (j + 1);
      }
    }
    // The stamp holds all but ~1e-9 of the light (psfStampHalfSize); pixel integration keeps the first moment.
    close(sum, 12, 1e-6, 'injected flux');
    close(sx / sum, 30.3, 1e-6, 'centroid x');
    close(sy / sum, 20.7, 1e-6, 'centroid y');
    expect(out[5 * width + 5]).toBe(0.25);
    expect(image[30 * width + 30]).toBe(0.25); // input not modified
  });
});

describe('matching injected sources and per-level statistics', () => {
  it('drops the known sources, pairs the rest with the truth and counts the spurious ones', () => {
    const truth: InjectedSource[] = [
      { x: 10, y: 10, flux: 5, level: 0 },
      { x: 30, y: 10, flux: 5, level: 0 },
      { x: 50, y: 10, flux: 5, level: 0 },
    ];
    const known = [{ x: 80, y: 80 }];
    const recovered = [
      { x: 10.5, y: 10, flux: 5.5, fluxErr: 0.5 }, // injected 0, 0.5 px
      { x: 80.2, y: 80, flux: 50 }, // the known source
      { x: 50, y: 11, flux: 4, fluxErr: 0.5 }, // injected 2, 1 px
      { x: 65, y: 40, flux: 3 }, // spurious
    ];
    const result = matchInjected(truth, recovered, known, { radiusPixels: 1.5, knownRadiusPixels: 1.5 });
    expect(result.outcomes.map((outcome) => outcome.recovered)).toEqual([true, false, true]);
    expect(result.outcomes[0]!.measuredFlux).toBe(5.5);
    close(result.outcomes[2]!.separationPixels, 1, 1e-12, 'separation');
    expect(result.spurious).toBe(1);
    expect(result.knownRecovered).toBe(1);
  });

  it('computes completeness with a Wilson interval, flux bias, scatter and pulls per level', () => {
    // Level 0: 10 injected at flux 10, 7 recovered with measured/injected 0.9, 1.0, 1.0, 1.1, 1.1, 1.2, 1.3.
    // Completeness 0.7; Wilson z = 1: centre (0.7 + 0.05)/1.1 = 0.681818, half (1/1.1)·√(0.021 + 0.0025) = 0.139361
    // → [0.542457, 0.821179]. Bias: median ratio 1.1 → +0.1. MAD of |r − 1.1| = {0.2,0.1,0.1,0,0,0.1,0.2} → 0.1,
    // scatter 0.14826. Pulls with error 1: (m − 10)/1 = {−1, 0, 0, 1, 1, 2, 3} → median 1.
    const ratios = [0.9, 1.0, 1.0, 1.1, 1.1, 1.2, 1.3];
    const outcomes: InjectionOutcome[] = Array.from({ length: 10 }, (_, i) => ({
      truth: { x: i, y: 0, flux: 10, level: 0 },
      recovered: i < 7,
      measuredFlux: i < 7 ? 10 * ratios[i]! : null,
      measuredFluxErr: i < 7 ? 1 : null,
      separationPixels: i < 7 ? 0.1 * (i + 1) : null,
    }));
    const [result] = completenessByLevel([10, 20], outcomes);
    expect(result!.injected).toBe(10);
    expect(result!.recovered).toBe(7);
    close(result!.completeness, 0.7, 1e-12, 'completeness');
    close(result!.completenessLow, 0.542457, 1e-6, 'Wilson low');
    close(result!.completenessHigh, 0.821179, 1e-6, 'Wilson high');
    close(result!.fluxBias, 0.1, 1e-12, 'flux bias');
    close(result!.fluxScatter, 0.14826, 1e-5, 'flux scatter');
    close(result!.pullMedian, 1, 1e-9, 'pull median');
    close(result!.medianSeparationPixels, 0.4, 1e-12, 'median separation');
    expect(completenessByLevel([10, 20], outcomes)[1]!.injected).toBe(0);
  });

  it('recovers the analytic completeness Φ(SNR − threshold) for forced PSF photometry in white noise', () => {
    // Parameter recovery with known truth: noise σ = 1, a PSF-weighted flux estimate at the found position has
    // error σ_F = 1/√Σpsf², so a source of true SNR s passes "SNR > 5" with probability Φ(s − 5) (@stdlib normal
    // CDF as the reference). Each level's measured completeness must contain it within its 3σ Wilson interval.
    const width = 200;
    const height = 200;
    const psf = psfFromFwhm(3, 3, 0);
    const halfSize = psfStampHalfSize(psf);
    const size = 2 * halfSize + 1;
    const centred = psfStamp(psf, 0, 0, halfSize).values;
    const sumSquares = centred.reduce((sum, value) => sum + value * value, 0);
    const snrLevels = [3, 4.5, 5.5, 8];
    const levels = snrLevels.map((snr) => fluxForSnr(snr, 1, sumSquares));
    const plan = planInjections({
      width,
      height,
      levels,
      perLevel: 150,
      maxPerRun: 50,
      seed: 2026,
      knownSources: [],
      exclusionRadiusPixels: 12,
    });
    const random = seededRandom(99);
    const outcomes: InjectionOutcome[] = [];
    for (const run of plan) {
      const noise = new Float64Array(width * height);
      for (let i = 0; i < noise.length; i += 2) {
        // Box–Muller transform: two independent N(0, 1) values from two uniforms.
        const r = Math.sqrt(-2 * Math.log(1 - random()));
        const t = 2 * Math.PI * random();
        noise[i] = r * Math.cos(t);
        noise[i + 1] = r * Math.sin(t);
      }
      const image = injectSources(noise, width, height, run.truth, psf);
      const recovered = run.truth.flatMap((source) => {
        // Forced photometry at the nearest pixel centre (the "detection" position).
        const cx = Math.round(source.x - 1);
        const cy = Math.round(source.y - 1);
        const stamp = psfStamp(psf, 0, 0, halfSize).values;
        let numerator = 0;
        let denominator = 0;
        for (let j = -halfSize; j <= halfSize; j++) {
          for (let i = -halfSize; i <= halfSize; i++) {
            const p = stamp[(j + halfSize) * size + (i + halfSize)]!;
            numerator += p * image[(cy + j) * width + (cx + i)]!;
            denominator += p * p;
          }
        }
        const flux = numerator / denominator;
        const fluxErr = 1 / Math.sqrt(denominator);
        return flux / fluxErr > 5 ? [{ x: cx + 1, y: cy + 1, flux, fluxErr }] : [];
      });
      outcomes.push(
        ...matchInjected(run.truth, recovered, [], { radiusPixels: 1, knownRadiusPixels: 1 }).outcomes,
      );
    }
    const results = completenessByLevel(levels, outcomes, { z: 3 });
    results.forEach((result, k) => {
      // Forced at the nearest pixel centre, not the sub-pixel position: the expected SNR drops by the PSF overlap
      // ⟨psf(·), psf(· − δ)⟩/Σpsf², ≤ 4 % for |δ| ≤ 0.5 px at FWHM 3 px; the 3σ interval covers that.
      const expected = normal.cdf(snrLevels[k]! - 5, 0, 1);
      const message = `SNR ${snrLevels[k]}: expected ${expected.toFixed(3)}, measured ${result.completeness.toFixed(3)} [${result.completenessLow.toFixed(3)}, ${result.completenessHigh.toFixed(3)}]`;
      console.info(message);
      expect(
        expected >= result.completenessLow - 0.03 && expected <= result.completenessHigh + 0.03,
        message,
      ).toBe(true);
    });
    expect(results[0]!.completeness).toBeLessThan(0.1);
    expect(results[3]!.completeness).toBeGreaterThan(0.95);
  });
});

describe('false-source rate from the source-subtracted image', () => {
  it('counts detections per SNR bin per unit area, leaves out subtraction residuals and gives reliability', () => {
    const detections = [
      { x: 10, y: 10, snr: 3.5 },
      { x: 40, y: 40, snr: 4.2 },
      { x: 70, y: 15, snr: 6 },
      { x: 100.5, y: 100, snr: 9 }, // residual of the subtracted source at (100, 100)
    ];
    const { bins, residualsExcluded } = falseSourceRate(detections, {
      snrEdges: [3, 5, 10],
      area: 0.5,
      subtractedSources: [{ x: 100, y: 100 }],
      residualRadiusPixels: 2,
      realSnr: [3.1, 3.3, 4, 4.9, 6, 7, 8, 9, 9.5, 9.9],
    });
    expect(residualsExcluded).toBe(1);
    expect(bins.map((bin) => bin.count)).toEqual([2, 1]);
    expect(bins[0]!.rate).toBe(4);
    // Bin 1: 2 false among 4 real → reliability 0.5; limits from Gehrels n = 2: 0.7120, 4.6583 → 1 − 4.6583/4 < 0 → 0.
    close(bins[0]!.reliability, 0.5, 1e-12, 'reliability bin 1');
    close(bins[0]!.reliabilityHigh, 1 - 0.712 / 4, 1e-3, 'reliability bin 1 high');
    expect(bins[0]!.reliabilityLow).toBe(0);
    // Bin 2: 1 false among 6 real → 5/6.
    close(bins[1]!.reliability, 5 / 6, 1e-12, 'reliability bin 2');
    expect(() => falseSourceRate(detections, { snrEdges: [3], area: 1 })).toThrow(
      'SNR bin edges must be at least two strictly increasing numbers.',
    );
  });
});
