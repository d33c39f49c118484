// @vitest-environment node
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  EXP_ARRAY_LIMIT,
  EXP_REDUCTION,
  expArray,
  expClamped,
  shiftExpAdd,
} from '../../../server/engine/math/exp-array';

/** The reference is the platform's Math.exp (V8's fdlibm port, correctly rounded to within 1 ulp). */
describe('expArray', () => {
  it('agrees with Math.exp to 2e−15 relative over the whole clamped range', () => {
    const n = 200_001;
    const x = Float64Array.from(
      { length: n },
      (_, i) => -EXP_ARRAY_LIMIT + (2 * EXP_ARRAY_LIMIT * i) / (n - 1),
    );
    // plus points at and next to the reduction's breakpoints k·ln2/64 and round values
    const extra = [0, 1, -1, 0.5, Math.LN2, -Math.LN2, Math.LN2 / 128, 1e-300, -1e-17, 709.78 - 9.78, 88.7];
    const all = Float64Array.from([...x, ...extra]);
    const out = new Float64Array(all.length);
    expArray(all, 0, out);
    let worst = 0;
    for (let i = 0; i < all.length; i++) worst = Math.max(worst, Math.abs(out[i]! / Math.exp(all[i]!) - 1));
    expect(worst).toBeLessThan(2e-15);
    expect(expClamped(0)).toBe(1);
  });

  it('writes out the named reduction constants exactly', () => {
    const source = readFileSync(new URL('../../../server/engine/math/exp-array.ts', import.meta.url), 'utf8');
    const body = source.slice(source.indexOf('function expReduced'));
    for (const value of [
      EXP_REDUCTION.limit,
      EXP_REDUCTION.inverseStep,
      EXP_REDUCTION.round,
      EXP_REDUCTION.stepHi,
      EXP_REDUCTION.stepLo,
      EXP_REDUCTION.steps - 1,
    ]) {
      expect(body, String(value)).toContain(String(value));
    }
  });

  it('adds the shift, works in place and clamps instead of overflowing', () => {
    const x = Float64Array.from([-3, 0, 2.5, 1e6, -1e6, 701]);
    expArray(x, 0.25, x);
    expect(x[0]! / Math.exp(-2.75) - 1).toBeCloseTo(0, 14);
    expect(x[2]! / Math.exp(2.75) - 1).toBeCloseTo(0, 14);
    expect(x[3]! / Math.exp(700) - 1).toBeCloseTo(0, 13);
    expect(x[4]! / Math.exp(-700) - 1).toBeCloseTo(0, 13);
    expect(x[5]).toBe(x[3]);
    expect(x.every((v) => Number.isFinite(v) && v > 0)).toBe(true);
  });
});

describe('shiftExpAdd', () => {
  it('shifts in place, exponentiates, adds and sums', () => {
    const x = Float64Array.from([-1, 0, 1.5]);
    const add = Float64Array.from([0.5, 2, 0]);
    const e = new Float64Array(3);
    const total = new Float64Array(3);
    const sum = shiftExpAdd(x, 0.5, e, add, total);
    expect(Array.from(x)).toEqual([-0.5, 0.5, 2]);
    for (let i = 0; i < 3; i++) {
      expect(e[i]! / Math.exp(x[i]!) - 1).toBeCloseTo(0, 14);
      expect(total[i]).toBe(e[i]! + add[i]!);
    }
    expect(sum).toBeCloseTo(total[0]! + total[1]! + total[2]!, 12);
  });
});
