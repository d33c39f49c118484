// @vitest-environment node
import { describe, expect, it } from 'vitest';
import {
  checkOptions,
  LbfgsWorkspace,
  minimiseLbfgs,
  type ObjectiveAndGradient,
} from '../../../server/engine/optimise/lbfgs';

/**
 * Extended Rosenbrock function (the chained form of the standard test function;
 * Moré, Garbow & Hillstrom 1981, ACM TOMS 7, problem 1 for n = 2; from memory): f = Σ 100 (x_{i+1} − x_i²)² + (1 − x_i)²,
 * unique minimum f = 0 at x = (1, …, 1).
 */
const rosenbrock: ObjectiveAndGradient = (x, g) => {
  g.fill(0);
  let f = 0;
  for (let i = 0; i + 1 < x.length; i++) {
    const a = x[i]!;
    const b = x[i + 1]!;
    const t = b - a * a;
    f += 100 * t * t + (1 - a) * (1 - a);
    g[i] = g[i]! - 400 * a * t - 2 * (1 - a);
    g[i + 1] = g[i + 1]! + 200 * t;
  }
  return f;
};

/** A seeded linear congruential generator (Numerical Recipes constants) for reproducible test matrices. */
function lcg(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return s / 2 ** 32;
  };
}

describe('minimiseLbfgs', () => {
  it('gives the same runs with a workspace shared between them as with fresh vectors', () => {
    // Runs of 30, 10 and 40 variables in turn: the second takes views of the first's buffers, the third makes
    // them grow. Each must match a run without a workspace exactly (same iterations, same minimiser).
    const workspace = new LbfgsWorkspace();
    for (const n of [30, 10, 40]) {
      const x0 = new Float64Array(n);
      for (let i = 0; i < n; i++) x0[i] = i % 2 === 0 ? -1.2 : 1;
      const options = { gradientTolerance: 1e-9, maxIterations: 5000 };
      const fresh = minimiseLbfgs(rosenbrock, x0, options);
      const shared = minimiseLbfgs(rosenbrock, x0, { ...options, workspace });
      expect(shared.iterations, `n = ${n}`).toBe(fresh.iterations);
      expect(shared.evaluations, `n = ${n}`).toBe(fresh.evaluations);
      expect(Array.from(shared.x), `n = ${n}`).toEqual(Array.from(fresh.x));
      expect(shared.converged, `n = ${n}: ${shared.reason}`).toBe(true);
    }
  });

  it('finds the Rosenbrock minimum at (1, 1) from the classic start (−1.2, 1)', () => {
    // Start (−1.2, 1) is the standard one (Moré, Garbow & Hillstrom 1981, problem 1).
    const r = minimiseLbfgs(rosenbrock, Float64Array.from([-1.2, 1]), { gradientTolerance: 1e-10 });
    expect(r.converged, `reason ${r.reason}`).toBe(true);
    for (const v of r.x)
      expect(Math.abs(v - 1), `x = ${Array.from(r.x)}, expected 1 ± 1e-6`).toBeLessThan(1e-6);
    expect(r.f).toBeLessThan(1e-12);
  });

  it('finds the n-D Rosenbrock minimum at all ones (n = 30)', () => {
    const x0 = new Float64Array(30);
    for (let i = 0; i < 30; i++) x0[i] = i % 2 === 0 ? -1.2 : 1;
    const r = minimiseLbfgs(rosenbrock, x0, { gradientTolerance: 1e-9, maxIterations: 5000 });
    expect(r.converged, `reason ${r.reason}`).toBe(true);
    const worst = Math.max(...Array.from(r.x, (v) => Math.abs(v - 1)));
    expect(worst, `max |x − 1| = ${worst}, tolerance 1e-5`).toBeLessThan(1e-5);
  });

  it('solves an SPD linear system as the minimum of ½xᵀAx − bᵀx', () => {
    // Known solution: choose x* first, set b = A x*; the minimiser of the quadratic is A⁻¹b = x*.
    const n = 40;
    const rand = lcg(7);
    const B = Array.from({ length: n }, () => Array.from({ length: n }, () => rand() - 0.5));
    const A = Array.from({ length: n }, (_, i) =>
      Array.from({ length: n }, (_, j) => {
        let s = i === j ? 0.5 : 0; // A = BᵀB + 0.5 I is SPD
        for (let k = 0; k < n; k++) s += B[k]![i]! * B[k]![j]!;
        return s;
      }),
    );
    const xStar = Array.from({ length: n }, () => rand() * 4 - 2);
    const b = A.map((row) => row.reduce((s, v, j) => s + v * xStar[j]!, 0));
    const quad: ObjectiveAndGradient = (x, g) => {
      let f = 0;
      for (let i = 0; i < n; i++) {
        let ax = 0;
        for (let j = 0; j < n; j++) ax += A[i]![j]! * x[j]!;
        g[i] = ax - b[i]!;
        f += 0.5 * x[i]! * ax - b[i]! * x[i]!;
      }
      return f;
    };
    // |x − x*| ≤ |g| / λmin(A) with λmin ≥ 0.5, so |g| ≤ 1e-6 bounds the error by 2e-6 (f ≈ −116 leaves round-off
    // of ~1e-14 in f, which limits how small |g| can usefully get).
    const r = minimiseLbfgs(quad, new Float64Array(n), { gradientTolerance: 1e-6, maxIterations: 2000 });
    expect(r.converged, `reason ${r.reason}`).toBe(true);
    for (let i = 0; i < n; i++) {
      expect(
        Math.abs(r.x[i]! - xStar[i]!),
        `x[${i}] = ${r.x[i]}, expected ${xStar[i]}, tol 2e-6`,
      ).toBeLessThan(2e-6);
    }
  });

  it('accepts only steps that satisfy the strong Wolfe conditions', () => {
    const c1 = 1e-4;
    const c2 = 0.9;
    let last = { x: new Float64Array(0), f: 0, g: new Float64Array(0) };
    const recording: ObjectiveAndGradient = (x, g) => {
      const f = rosenbrock(x, g);
      last = { x: Float64Array.from(x), f, g: Float64Array.from(g) };
      return f;
    };
    const x0 = Float64Array.from([-1.2, 1, -1.2, 1, 0.5]);
    const g0 = new Float64Array(5);
    let prev = { x: Float64Array.from(x0), f: rosenbrock(x0, g0), g: g0 };
    let checked = 0;
    minimiseLbfgs(recording, x0, {
      c1,
      c2,
      onProgress: () => {
        // The accepted point is the last one evaluated. With s = x_{k+1} − x_k = α p the conditions read
        // f_{k+1} ≤ f_k + c1 g_kᵀs and |g_{k+1}ᵀs| ≤ c2 |g_kᵀs| (Nocedal & Wright eq. 3.7).
        let gs0 = 0;
        let gs1 = 0;
        for (let i = 0; i < 5; i++) {
          const s = last.x[i]! - prev.x[i]!;
          gs0 += prev.g[i]! * s;
          gs1 += last.g[i]! * s;
        }
        expect(gs0).toBeLessThan(0);
        expect(
          last.f,
          `sufficient decrease: f1 ${last.f}, f0 ${prev.f}, c1·gᵀs ${c1 * gs0}`,
        ).toBeLessThanOrEqual(prev.f + c1 * gs0 + 1e-12 * Math.abs(prev.f));
        expect(
          Math.abs(gs1),
          `curvature: |g1ᵀs| ${Math.abs(gs1)} vs c2|g0ᵀs| ${c2 * Math.abs(gs0)}`,
        ).toBeLessThanOrEqual(c2 * Math.abs(gs0) * (1 + 1e-9));
        prev = last;
        checked++;
      },
    });
    expect(checked).toBeGreaterThan(10);
  });

  it('stops on an absolute decrease and reports it', () => {
    // f = Σ log(1 + x²) flattens out: the decrease per iteration falls below 1e-3 long before |g| is tiny.
    const flat: ObjectiveAndGradient = (x, g) => {
      let f = 0;
      for (let i = 0; i < x.length; i++) {
        f += Math.log1p(x[i]! * x[i]!);
        g[i] = (2 * x[i]!) / (1 + x[i]! * x[i]!);
      }
      return f;
    };
    const r = minimiseLbfgs(flat, Float64Array.from([3, -2, 5]), {
      absoluteDecrease: 1e-3,
      stallIterations: 1,
      gradientTolerance: 0,
    });
    expect(r.reason).toBe('absolute-decrease');
    expect(r.converged).toBe(true);
  });

  it('reports progress with iteration, objective and gradient norm, and is deterministic', () => {
    const trace1: number[] = [];
    const trace2: number[] = [];
    const r1 = minimiseLbfgs(rosenbrock, Float64Array.from([-1.2, 1, 0.3]), {
      onProgress: (p) => trace1.push(p.iteration, p.objective, p.gradNorm),
    });
    const r2 = minimiseLbfgs(rosenbrock, Float64Array.from([-1.2, 1, 0.3]), {
      onProgress: (p) => trace2.push(p.iteration, p.objective, p.gradNorm),
    });
    expect(trace1.length).toBe(3 * r1.iterations);
    expect(trace1[0]).toBe(1);
    expect(trace2).toEqual(trace1);
    expect(Array.from(r2.x)).toEqual(Array.from(r1.x));
    expect(r2.evaluations).toBe(r1.evaluations);
  });

  it("stops when the caller's stopWhen test says so, with the iterate it was given", () => {
    // Stop once x is within 1e-3 of the known minimum (1, 1) of the Rosenbrock function.
    let seen: number[] = [];
    const r = minimiseLbfgs(rosenbrock, Float64Array.from([-1.2, 1]), {
      gradientTolerance: 0,
      stopWhen: (_p, x) => {
        seen = Array.from(x);
        return Math.hypot(x[0]! - 1, x[1]! - 1) < 1e-3;
      },
    });
    expect(r.reason).toBe('caller-converged');
    expect(r.converged).toBe(true);
    expect(Array.from(r.x)).toEqual(seen);
    expect(Math.hypot(r.x[0]! - 1, r.x[1]! - 1)).toBeLessThan(1e-3);
    // without the test it would go on to the gradient tolerance: more iterations
    const full = minimiseLbfgs(rosenbrock, Float64Array.from([-1.2, 1]), { gradientTolerance: 1e-10 });
    expect(full.iterations).toBeGreaterThan(r.iterations);
  });

  it('keeps working when curvature pairs are rejected with the memory full (sᵀy ≤ 0 on a concave patch)', () => {
    // f = a sine-perturbed quadratic, x²/2 + 0.4·sin(3x) per coordinate, has regions of negative curvature
    // (f'' = 1 − 3.6·sin(3x)), where pairs with sᵀy ≤ 0 come up and must be skipped; its minima are known only
    // numerically, so the check is that the gradient tolerance is reached.
    const wavy: ObjectiveAndGradient = (x, g) => {
      let f = 0;
      for (let i = 0; i < x.length; i++) {
        f += 0.5 * x[i]! * x[i]! + 0.4 * Math.sin(3 * x[i]!);
        g[i] = x[i]! + 1.2 * Math.cos(3 * x[i]!);
      }
      return f;
    };
    const x0 = Float64Array.from({ length: 12 }, (_, i) => 3 - 0.5 * i);
    const r = minimiseLbfgs(wavy, x0, { memory: 3, gradientTolerance: 1e-9, maxIterations: 2000 });
    expect(r.converged, `reason ${r.reason}`).toBe(true);
    expect(r.gradNorm).toBeLessThanOrEqual(1e-9);
  });

  it('respects the evaluation budget', () => {
    const r = minimiseLbfgs(rosenbrock, Float64Array.from([-1.2, 1]), { maxEvaluations: 10 });
    expect(r.reason).toBe('max-evaluations');
    expect(r.evaluations).toBeLessThanOrEqual(10);
    expect(r.converged).toBe(false);
  });

  it('stops when the signal is aborted', () => {
    const controller = new AbortController();
    let calls = 0;
    const counting: ObjectiveAndGradient = (x, g) => {
      calls++;
      if (calls === 5) controller.abort();
      return rosenbrock(x, g);
    };
    expect(() =>
      minimiseLbfgs(counting, Float64Array.from([-1.2, 1]), { signal: controller.signal }),
    ).toThrow(/abort/i);
    expect(calls).toBe(5);
  });

  it('rejects bad options with specific messages', () => {
    expect(() => checkOptions({ memory: 0 })).toThrow('L-BFGS memory must be a positive integer (got 0)');
    expect(() => checkOptions({ c1: 0.5, c2: 0.4 })).toThrow(
      'L-BFGS line-search constants need 0 < c1 < c2 < 1 (got c1 = 0.5, c2 = 0.4)',
    );
    expect(() => checkOptions({ absoluteDecrease: -1 })).toThrow(
      'L-BFGS absoluteDecrease must be ≥ 0 (got -1)',
    );
    expect(() => minimiseLbfgs(() => NaN, Float64Array.from([1]))).toThrow(
      'L-BFGS: the objective is not finite at the starting point (got NaN)',
    );
  });
});
