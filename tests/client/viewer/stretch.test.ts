import { describe, expect, it } from 'vitest';

import { makeStretch, stretchCurve } from '@/viewer/stretch';
import {
  clipLimits,
  orderStatistics,
  parseTypedLimits,
  quantile,
  sortedOrderStatistics,
} from '@/viewer/limits';

const TOL = 1e-12;

function close(actual: number, expected: number, what: string) {
  const diff = Math.abs(actual - expected);
  expect(diff, `${what}: expected ${expected}, got ${actual}, |diff| ${diff} > ${TOL}`).toBeLessThanOrEqual(
    TOL,
  );
}

describe('stretches (hand-computed values)', () => {
  const limits = { lower: -1, upper: 3 };
  // v = 0 → t = (0 − (−1))/(3 − (−1)) = 0.25.
  it('linear: s = t', () => {
    const s = makeStretch(limits, { stretch: 'linear' });
    close(s(0), 0.25, 'linear(0)');
    close(s(1), 0.5, 'linear(1)'); // t = 2/4
    close(s(-5), 0, 'below the lower limit clips to 0');
    close(s(10), 1, 'above the upper limit clips to 1');
  });
  it('square root: s = √t', () => {
    const s = makeStretch(limits, { stretch: 'sqrt' });
    close(s(0), 0.5, 'sqrt(0.25)'); // √0.25 = 0.5
    close(s(-1 + 4 * 0.09), 0.3, 'sqrt(0.09)'); // √0.09 = 0.3
  });
  it('logarithmic: s = ln(1 + a t)/ln(1 + a)', () => {
    // a = 9, t = 0.25: ln(3.25)/ln(10) = 1.178655/2.302585 = 0.5118834…; log10(3.25) = 0.51188336
    const s = makeStretch(limits, { stretch: 'log', logContrast: 9 });
    close(s(0), Math.log10(3.25), 'log a=9 at t=0.25');
    expect(Math.abs(s(0) - 0.51188336)).toBeLessThan(1e-8);
    // a = 99, t = 0.1 (v = −0.6): log10(1 + 9.9)/log10(100) = log10(10.9)/2 = 1.0374265/2 = 0.5187133
    const s99 = makeStretch(limits, { stretch: 'log', logContrast: 99 });
    expect(Math.abs(s99(-0.6) - 0.51871326)).toBeLessThan(1e-7);
  });
  it('asinh (Lupton, Gunn & Szalay 1999, AJ 118, 1406): s = asinh(t/β)/asinh(1/β)', () => {
    // asinh(x) = ln(x + √(x² + 1)). β = 0.5, t = 0.25: asinh(0.5) = ln(0.5 + √1.25) = ln(1.6180340) = 0.4812118;
    // asinh(2) = ln(2 + √5) = ln(4.2360680) = 1.4436355; ratio 0.3333333 (0.48121183/1.44363547).
    const s = makeStretch(limits, { stretch: 'asinh', asinhSoftening: 0.5 });
    expect(Math.abs(s(0) - 0.48121183 / 1.44363547)).toBeLessThan(1e-7);
    close(s(0), Math.log(0.5 + Math.sqrt(1.25)) / Math.log(2 + Math.sqrt(5)), 'asinh via logarithms');
    // Small β: for t ≫ β the curve is logarithmic: s ≈ ln(2t/β)/ln(2/β) (asinh x ≈ ln 2x for large x).
    const soft = stretchCurve({ stretch: 'asinh', asinhSoftening: 1e-4 });
    expect(Math.abs(soft(0.5) - Math.log(1e4) / Math.log(2e4))).toBeLessThan(1e-6);
    // Large β: asinh x ≈ x for small x, so the curve becomes linear.
    const stiff = stretchCurve({ stretch: 'asinh', asinhSoftening: 1e4 });
    expect(Math.abs(stiff(0.3) - 0.3)).toBeLessThan(1e-8);
  });
  it('every curve maps 0 → 0 and 1 → 1 and rises', () => {
    for (const stretch of ['linear', 'sqrt', 'log', 'asinh'] as const) {
      const s = stretchCurve({ stretch });
      close(s(0), 0, `${stretch}(0)`);
      close(s(1), 1, `${stretch}(1)`);
      for (let k = 1; k <= 100; k++)
        expect(s(k / 100), `${stretch} rises at ${k}`).toBeGreaterThan(s((k - 1) / 100));
    }
  });
  it('non-finite values are NaN; bad limits and options are refused', () => {
    const s = makeStretch(limits);
    expect(s(NaN)).toBeNaN();
    expect(s(Infinity)).toBeNaN();
    expect(() => makeStretch({ lower: 2, upper: 2 })).toThrow(
      'The upper display limit (2) must be above the lower one (2).',
    );
    expect(() => makeStretch(limits, { stretch: 'asinh', asinhSoftening: 0 })).toThrow(
      'The asinh softening must be a positive number, got 0.',
    );
  });
});

describe('limits from percentiles', () => {
  // 0, 1, …, 100 shuffled, with NaN, ±∞ and one masked value 1e6 mixed in.
  const values = Array.from({ length: 101 }, (_, i) => (i * 37) % 101);
  const data = new Float32Array([...values, NaN, Infinity, -Infinity, 1e6]);
  const mask = new Uint8Array(data.length);
  mask[data.length - 1] = 1;

  it('keeps only the finite, unmasked values, in order', () => {
    const sorted = orderStatistics(data, mask);
    expect(sorted.count).toBe(101);
    expect(Array.from({ length: 101 }, (_, k) => sorted.at(k))).toEqual(
      Array.from({ length: 101 }, (_, i) => i),
    );
  });
  it('histogram order statistics equal those of a full sort (naive reference in the test)', () => {
    // Pseudo-random values with heavy ties and a long tail, NaNs and a mask; fixed seed.
    let seed = 7;
    const next = () => (seed = (seed * 16807) % 2147483647) / 2147483647;
    const n = 20000;
    const values = Float32Array.from({ length: n }, (_, i) =>
      i % 97 === 0 ? NaN : i % 5 === 0 ? 0.25 : Math.exp(8 * next()) - 1,
    );
    const masked = Uint8Array.from({ length: n }, (_, i) => (i % 13 === 0 ? 1 : 0));
    const reference = Float32Array.from(
      Array.from(values).filter((v, i) => Number.isFinite(v) && !masked[i]),
    ).sort();
    const fast = orderStatistics(values, masked);
    expect(fast.count).toBe(reference.length);
    for (const k of [
      0,
      1,
      17,
      1000,
      Math.floor(reference.length / 2),
      reference.length - 2,
      reference.length - 1,
    ]) {
      expect(fast.at(k), `rank ${k}: expected ${reference[k]}, got ${fast.at(k)}`).toBe(reference[k]);
    }
    for (const clip of [99, 99.5, 99.9, 100]) {
      expect(clipLimits(fast, clip)).toEqual(clipLimits(sortedOrderStatistics(reference), clip));
    }
  });
  it('percentiles interpolate between order statistics (Hyndman & Fan definition 7)', () => {
    const sorted = orderStatistics(data, mask);
    // n = 101, h = 100 q: the q-quantile of 0..100 is exactly 100 q.
    close(quantile(sorted, 0.0025), 0.25, 'q = 0.25 %');
    close(quantile(sorted, 0.9975), 99.75, 'q = 99.75 %');
    // 99.5 % clip → 0.25 % and 99.75 %; 99.9 % → 0.05 % and 99.95 %; 100 % → min and max.
    const c995 = clipLimits(sorted, 99.5);
    close(c995.lower, 0.25, '99.5 % lower');
    close(c995.upper, 99.75, '99.5 % upper');
    const c999 = clipLimits(sorted, 99.9);
    expect(Math.abs(c999.lower - 0.05)).toBeLessThan(1e-9);
    expect(Math.abs(c999.upper - 99.95)).toBeLessThan(1e-9);
    expect(clipLimits(sorted, 100)).toEqual({ lower: 0, upper: 100 });
    // Four values 1, 2, 3, 10: median h = 1.5 → 2.5 (numpy.percentile([1,2,3,10], 50) = 2.5).
    close(quantile(orderStatistics(new Float32Array([10, 2, 1, 3])), 0.5), 2.5, 'median of 1,2,3,10');
  });
  it('an all-blank plane and bad typed limits get plain messages', () => {
    expect(() => clipLimits(orderStatistics(new Float32Array([NaN, NaN])), 99.5)).toThrow(
      'There are no valid pixels to take limits from.',
    );
    expect(parseTypedLimits('1', 'x')).toEqual({ error: 'Enter a number for the upper limit.' });
    expect(parseTypedLimits('5', '1')).toEqual({ error: 'The upper limit must be above the lower limit.' });
    expect(parseTypedLimits(' -0.5 ', '2e-3')).toEqual({ lower: -0.5, upper: 0.002 });
  });
});
