// @vitest-environment node
import poisson from '@stdlib/stats-base-dists-poisson';
import { describe, expect, it } from 'vitest';
import { expectClose as close } from './close-to';
import {
  DEG2_PER_SR,
  numberCounts,
  poissonLowerLimit,
  poissonUpperLimit,
} from '../../server/catalogue/number-counts';

/** Exact Poisson limits by bisection on @stdlib's Poisson CDF (the reference), one-sided 84.13 % = Φ(1). */
const CONFIDENCE = 0.8413447460685429;
function bisect(f: (x: number) => number, a: number, b: number): number {
  for (let i = 0; i < 200; i++) {
    const m = (a + b) / 2;
    if (f(m) > 0) a = m;
    else b = m;
  }
  return (a + b) / 2;
}
const exactUpper = (n: number) => bisect((l) => poisson.cdf(n, l) - (1 - CONFIDENCE), 0, 1000);
const exactLower = (n: number) => (n === 0 ? 0 : bisect((l) => poisson.cdf(n - 1, l) - CONFIDENCE, 0, 1000));

describe('Poisson limits (Gehrels 1986, ApJ 303, 336, eqs. 7 and 12, S = 1)', () => {
  it('match the exact limits from @stdlib Poisson within the accuracy Gehrels quotes', () => {
    // Measured here: upper limit within 1.4 % (worst at n = 0), lower within 0.8 % (worst at n = 1).
    for (const n of [0, 1, 2, 3, 5, 10, 20, 50, 100]) {
      const upper = exactUpper(n);
      close(poissonUpperLimit(n), upper, 0.015 * upper, `upper limit n=${n}`);
      const lower = exactLower(n);
      close(poissonLowerLimit(n), lower, 0.01 * lower, `lower limit n=${n}`);
    }
    // Gehrels Table 1 (1σ column, from memory, checked by the exact values above): n=0 → 1.841; n=1 → 3.300, 0.173.
    close(exactUpper(0), 1.841, 0.001, 'Table 1 n=0 upper');
    close(exactUpper(1), 3.3, 0.001, 'Table 1 n=1 upper');
    close(exactLower(1), 0.173, 0.001, 'Table 1 n=1 lower');
  });
});

describe('differential number counts on a toy case', () => {
  // Area 0.01 sr, bins [1, 2) and [2, 4). Fluxes 1.0, 1.5, 1.9 | 2, 3 | 4 and 0.5 outside.
  // Bin 1: n = 3, dN/dS = 3 / (1 × 0.01) = 300 sr⁻¹ per unit flux; bin 2: 2 / (2 × 0.01) = 100.
  // Per deg²: divide by (180/π)² = 3282.806. Centres √2 and √8; Euclidean S^2.5 dN/dS = 2^1.25·300 = 713.52.
  const fluxes = [1.0, 1.5, 1.9, 2, 3, 4, 0.5];
  // Completeness 0.5 at S = 1 rising to 1 at S = 4, linear in log S: C(S) = 0.5 + 0.5·log S / log 4.
  // C(1) = 0.5, C(1.5) = 0.64624, C(1.9) = 0.73150 → corrected bin 1 = 2 + 1.54741 + 1.36705 = 4.91446;
  // C(2) = 0.75, C(3) = 0.89624 → corrected bin 2 = 1.33333 + 1.11577 = 2.44911. C(√2) = 0.625, C(√8) = 0.875.
  const curve = { flux: [1, 4], completeness: [0.5, 1] };
  const bins = numberCounts(fluxes, { binEdges: [1, 2, 4], areaSr: 0.01, completeness: curve });

  it('counts per bin per unit flux per unit area, with Gehrels error bars', () => {
    expect(bins.map((bin) => bin.count)).toEqual([3, 2]);
    close(bins[0]!.perSr.value, 300, 1e-9, 'bin 1 per sr');
    close(bins[1]!.perSr.value, 100, 1e-9, 'bin 2 per sr');
    close(bins[0]!.perDeg2.value, 300 / 3282.806350011744, 1e-9, 'bin 1 per deg²');
    expect(DEG2_PER_SR).toBeCloseTo(3282.806350011744, 9);
    close(bins[0]!.fluxCentre, Math.SQRT2, 1e-12, 'bin 1 centre');
    close(bins[0]!.euclideanPerSr.value, 2 ** 1.25 * 300, 1e-9, 'bin 1 Euclidean');
    // n = 3: Gehrels limits 1.3723 and 5.9365 → ×100 per sr.
    close(bins[0]!.perSr.low, 137.23, 0.01, 'bin 1 lower');
    close(bins[0]!.perSr.high, 593.65, 0.01, 'bin 1 upper');
  });

  it('corrects each source by 1/C(S) when a completeness curve is given', () => {
    close(bins[0]!.completeness, 0.625, 1e-9, 'C at bin 1 centre');
    close(bins[0]!.corrected?.count, 4.91446, 1e-4, 'bin 1 corrected count');
    close(bins[1]!.corrected?.count, 2.44911, 1e-4, 'bin 2 corrected count');
    close(bins[0]!.corrected?.perSr.value, 491.446, 0.01, 'bin 1 corrected per sr');
    // Error bars scale with the correction: upper 5.9365 × 4.91446/3.
    close(bins[0]!.corrected?.perSr.high, 593.65 * (4.91446 / 3), 0.05, 'bin 1 corrected upper');
  });

  it('gives no corrected value below the measured range or the minimum completeness, and says why', () => {
    // C(√2) = 0.2 + 0.2 · log √2 / log 4 = 0.25.
    const low = numberCounts(fluxes, {
      binEdges: [1, 2, 4],
      areaSr: 0.01,
      completeness: { flux: [1, 4], completeness: [0.2, 0.4] },
    });
    expect(low[0]!.corrected).toBeNull();
    expect(low[0]!.correctionNote).toBe('completeness 0.25 below 0.5: not corrected');
    const outside = numberCounts(fluxes, {
      binEdges: [1, 2, 4],
      areaSr: 0.01,
      completeness: { flux: [1.2, 4], completeness: [0.9, 1] },
    });
    expect(outside[0]!.corrected).toBeNull();
    expect(outside[0]!.correctionNote).toBe('below the faintest injected level: completeness not measured');
    expect(outside[1]!.corrected).not.toBeNull();
    expect(numberCounts(fluxes, { binEdges: [1, 2, 4], areaSr: 0.01 })[0]!.corrected).toBeNull();
  });

  it('handles an empty bin (upper limit only) and refuses bad input', () => {
    const empty = numberCounts([1.5], { binEdges: [1, 2, 3], areaSr: 1 });
    expect(empty[1]!.count).toBe(0);
    expect(empty[1]!.perSr.low).toBe(0);
    close(empty[1]!.perSr.high, 1.866, 0.001, 'n = 0 upper limit');
    expect(() => numberCounts([1], { binEdges: [1, 1], areaSr: 1 })).toThrow(
      'Bin edges must be strictly increasing.',
    );
    expect(() => numberCounts([1], { binEdges: [1, 2], areaSr: 0 })).toThrow(
      'The survey area must be a positive number of steradians.',
    );
    expect(() =>
      numberCounts([1], { binEdges: [1, 2], areaSr: 1, completeness: { flux: [1], completeness: [1.2] } }),
    ).toThrow('Completeness 1.2 at flux 1 is outside 0…1.');
  });
});
