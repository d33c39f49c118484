/**
 * The fit checks' numbers: erfc/erf against the handbook tables, the unit normal's bin probabilities and
 * expected counts (also against @stdlib's normal CDF, an independent implementation), the ±3σ tail share,
 * the spectrum's points with their scatter, and the log-flux histogram.
 */
import normal from '@stdlib/stats-base-dists-normal';
import { describe, expect, it } from 'vitest';

import {
  erf,
  erfc,
  expectedNormalCounts,
  logHistogram,
  normalCdf,
  normalProbability,
  spectrumPoints,
  tailShare,
} from '@/components/runs/fit-checks';

/** Numerical Recipes' bound on erfcc's fractional error. */
const RELATIVE = 1.2e-7;

function expectRelative(actual: number, expected: number, tolerance: number, what: string) {
  const difference = Math.abs(actual - expected);
  expect(
    difference <= tolerance * Math.abs(expected),
    `${what}: expected ${expected}, got ${actual}, difference ${difference}, tolerance ${tolerance} relative`,
  ).toBe(true);
}

describe('erf and erfc', () => {
  it('match Abramowitz & Stegun, Table 7.1 (erf to 10 decimals)', () => {
    // Abramowitz & Stegun (1964), Handbook of Mathematical Functions, Table 7.1.
    const table: [number, number][] = [
      [0.1, 0.112462916],
      [0.5, 0.5204998778],
      [1.0, 0.8427007929],
      [1.5, 0.9661051465],
      [2.0, 0.995322265],
    ];
    for (const [x, value] of table) {
      // erf = 1 − erfc: an error of 1.2e-7 relative in erfc(x) ≤ 1 is at most 1.2e-7 absolute.
      expect(Math.abs(erf(x) - value), `erf(${x})`).toBeLessThan(RELATIVE);
      expect(Math.abs(erf(-x) + value), `erf(${-x}) = −erf(${x})`).toBeLessThan(RELATIVE);
    }
    expect(erf(0)).toBeCloseTo(0, 7);
    expect(erfc(Infinity)).toBe(0);
    expect(erfc(-Infinity)).toBe(2);
    expect(erfc(NaN)).toBeNaN();
  });

  it('keep their relative accuracy in the far tail (against @stdlib normal CDF)', () => {
    for (const x of [-8, -5.75, -4, -2.5, -1, -0.3, 0, 0.7, 1.9, 3, 4.5, 6]) {
      // @stdlib/stats-base-dists-normal (an independent implementation): Φ(x) for the unit normal.
      expectRelative(normalCdf(x), normal.cdf(x, 0, 1), 2 * RELATIVE, `Φ(${x})`);
    }
  });

  it('give the unit normal of A&S Table 26.1', () => {
    // Abramowitz & Stegun, Table 26.1: Φ(0.25) = 0.5987063257, Φ(1) = 0.8413447461, Φ(2) = 0.9772498681,
    // Φ(3) = 0.9986501020.
    expect(Math.abs(normalCdf(0.25) - 0.5987063257)).toBeLessThan(1e-7);
    expect(Math.abs(normalCdf(1) - 0.8413447461)).toBeLessThan(1e-7);
    expect(Math.abs(normalCdf(2) - 0.9772498681)).toBeLessThan(1e-7);
    expect(Math.abs(normalCdf(3) - 0.998650102)).toBeLessThan(1e-7);
    // One σ either side: erf(1/√2) = 0.6826894921 (the familiar 68.27 %).
    expect(Math.abs(normalProbability(-1, 1) - 0.6826894921)).toBeLessThan(2e-7);
    expect(() => normalProbability(1, 0)).toThrow('A bin must not end (0) before it starts (1).');
  });
});

describe('expected counts per bin', () => {
  // The server's residual histogram: −6 … 6 in steps of 0.25, values beyond in the end bins.
  const edges = Array.from({ length: 49 }, (_, i) => -6 + i * 0.25);
  const total = 1_000_000;
  const counts = expectedNormalCounts(edges, total);

  it('follow Φ(b) − Φ(a) from the handbook values', () => {
    expect(counts).toHaveLength(48);
    // Bin [0, 0.25): Φ(0.25) − ½ = 0.0987063257 (A&S Table 26.1).
    expectRelative(counts[24]!, total * 0.0987063257, 1e-6, 'bin [0, 0.25)');
    // Bin [1, 1.25): Φ(1.25) − Φ(1) = 0.8943502263 − 0.8413447461 (A&S Table 26.1).
    expectRelative(counts[28]!, total * (0.8943502263 - 0.8413447461), 1e-5, 'bin [1, 1.25)');
    // Mirror symmetry of the normal.
    for (let i = 0; i < 24; i++) expectRelative(counts[i]!, counts[47 - i]!, 1e-6, `bins ${i} and ${47 - i}`);
  });

  it('close the open end bins so the counts add up to the total', () => {
    const sum = counts.reduce((a, b) => a + b, 0);
    expectRelative(sum, total, 1e-6, 'sum of expected counts');
    // The last bin holds everything from 5.75 up: Q(5.75), against @stdlib.
    expectRelative(counts[47]!, total * (1 - normal.cdf(5.75, 0, 1)), 1e-5, 'bin [5.75, ∞)');
    const closed = expectedNormalCounts(edges, total, false);
    expect(closed[47]!).toBeLessThan(counts[47]!);
    expect(() => expectedNormalCounts([1], 10)).toThrow('A histogram needs at least two bin edges.');
  });

  it('give the ±3σ tail share of a unit normal, 0.27 %', () => {
    const share = tailShare(edges, counts, 3)!;
    // 2 Q(3) = 2 (1 − 0.9986501020) = 0.002699796 (A&S Table 26.1).
    expect(Math.abs(share.expected - 0.002699796)).toBeLessThan(1e-8);
    expectRelative(share.observed, share.expected, 1e-5, 'observed share of expected counts');
    expect(tailShare(edges, counts, 3.1)).toBeNull();
  });
});

describe('spectrum points', () => {
  it('drop bins a log–log plot cannot show and give each the scatter P √(2/modes)', () => {
    const points = spectrumPoints({
      k: [0, 0.01, 0.02, 0.04],
      power: [5, 2, 0, 0.5],
      modes: [1, 8, 16, 32],
      fitted: [9, 2.2, 1, 0.4],
    });
    expect(points.map((p) => p.k)).toEqual([0.01, 0.04]);
    expect(points[0]!.error).toBeCloseTo(2 * Math.sqrt(2 / 8), 12);
    expect(points[1]!.error).toBeCloseTo(0.5 * Math.sqrt(2 / 32), 12);
    expect(points[1]!.fitted).toBe(0.4);
  });
});

describe('log histogram', () => {
  it('bins log₁₀ values on multiples of the width and counts what has no logarithm', () => {
    const h = logHistogram([0.001, 0.0015, 0.0099, 0.01, 0.05, -0.002, 0, NaN], 0.5);
    // log₁₀: −3, −2.82, −2.004, −2, −1.30 → bins [−3, −2.5): 2, [−2.5, −2): 1, [−2, −1.5): 1, [−1.5, −1): 1.
    expect(h.counts).toEqual([2, 1, 1, 1]);
    expect(h.edges.map((e) => Number(e.toFixed(6)))).toEqual([-3, -2.5, -2, -1.5, -1]);
    expect(h.excluded).toBe(3);
    expect(logHistogram([], 0.1)).toEqual({ edges: [], counts: [], excluded: 0 });
    expect(() => logHistogram([1], 0)).toThrow('The bin width must be positive, got 0.');
  });
});
