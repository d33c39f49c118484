/**
 * float32 versus float64 FFTs in the model's objective (printed numbers, not a test).
 *
 * A synthetic objective shaped like the fit's: ξ white on an n×n grid, φ = μ + H(A ⊙ ξ) with a power-law
 * amplitude A_k ∝ (1 + |k|²)^(−γ/4), s = exp(φ), model m = K ⊛ s (Gaussian PSF), data d = m_true + noise, and
 * f(ξ) = Σ (d − m)² / (2σ²) + ½ ‖ξ‖². Gradient: g = ξ + A ⊙ H(s ⊙ Kᵀ((m − d)/σ²)). The diffuse field sits at
 * ~100σ (bright diffuse is the hard case for float32: the rounding scales with the signal).
 * Reported for both precisions: the objective and gradient difference from float64, a central finite-difference
 * gradient check along a random direction, and the relative error of f(ξ + εv) against the linear prediction
 * f(ξ) + ε gᵀv over ε (it falls like ε until rounding noise stops it).
 */
import { createConvolver, createHartley2d, kernelFromCentredStamp, type FftPrecision } from '../engine/fft';
import { mulberry32 } from '../engine/random/mulberry32';

function gaussianRandom(seed: number): () => number {
  const next = mulberry32(seed);
  const uniform = () => (next() + 0.5) / 4294967296; // in (0, 1): never log(0)
  return () => Math.sqrt(-2 * Math.log(uniform())) * Math.cos(2 * Math.PI * uniform());
}

interface Objective {
  value(xi: Float64Array, gradient: Float64Array): number;
  dispose(): void;
}

function makeProblem(n: number, seed: number) {
  const normal = gaussianRandom(seed);
  const amplitude = new Float64Array(n * n);
  for (let y = 0; y < n; y++) {
    for (let x = 0; x < n; x++) {
      const kx = Math.min(x, n - x),
        ky = Math.min(y, n - y);
      amplitude[y * n + x] = 30 * (1 + kx * kx + ky * ky) ** (-3.5 / 4);
    }
  }
  const fwhm = 3;
  const sigmaPsf = fwhm / (2 * Math.sqrt(2 * Math.log(2)));
  const half = 8;
  const stamp = new Float64Array((2 * half + 1) ** 2);
  let total = 0;
  for (let j = -half; j <= half; j++) {
    for (let i = -half; i <= half; i++) {
      const v = Math.exp(-(i * i + j * j) / (2 * sigmaPsf * sigmaPsf));
      stamp[(j + half) * (2 * half + 1) + i + half] = v;
      total += v;
    }
  }
  for (let i = 0; i < stamp.length; i++) stamp[i]! /= total;
  const kernel = kernelFromCentredStamp(stamp, 2 * half + 1, 2 * half + 1, n, n);
  const xiTrue = new Float64Array(n * n).map(() => normal());
  const sigma = 1;
  const mu = Math.log(100);
  return { n, amplitude, kernel, xiTrue, sigma, mu, normal };
}

function makeObjective(
  problem: ReturnType<typeof makeProblem>,
  precision: FftPrecision,
  data: Float64Array,
): Objective {
  const { n, amplitude, kernel, sigma, mu } = problem;
  const hartley = createHartley2d(n, n, { precision });
  const conv = createConvolver(n, n, kernel, { precision });
  const a = new Float64Array(n * n),
    phi = new Float64Array(n * n),
    s = new Float64Array(n * n);
  const m = new Float64Array(n * n),
    r = new Float64Array(n * n),
    t = new Float64Array(n * n);
  return {
    value(xi, gradient) {
      for (let i = 0; i < a.length; i++) a[i] = amplitude[i]! * xi[i]!;
      hartley.transform(a, phi);
      for (let i = 0; i < s.length; i++) s[i] = Math.exp(mu + phi[i]!);
      conv.apply(s, m);
      let f = 0;
      for (let i = 0; i < m.length; i++) {
        const res = (m[i]! - data[i]!) / sigma;
        f += 0.5 * res * res + 0.5 * xi[i]! * xi[i]!;
        r[i] = res / sigma;
      }
      conv.adjoint(r, t);
      for (let i = 0; i < t.length; i++) t[i] = t[i]! * s[i]!;
      hartley.transform(t, a);
      for (let i = 0; i < a.length; i++) gradient[i] = xi[i]! + amplitude[i]! * a[i]!;
      return f;
    },
    dispose() {
      hartley.dispose();
      conv.dispose();
    },
  };
}

export interface PrecisionReport {
  size: number;
  lines: string[];
}

export function comparePrecision(n: number): PrecisionReport {
  const problem = makeProblem(n, 2024);
  // Data from the float64 model at ξ_true plus unit noise.
  const clean = new Float64Array(n * n);
  {
    const hartley = createHartley2d(n, n);
    const conv = createConvolver(n, n, problem.kernel);
    const a = problem.amplitude.map((v, i) => v * problem.xiTrue[i]!);
    const phi = new Float64Array(n * n);
    hartley.transform(a, phi);
    conv.apply(
      phi.map((v) => Math.exp(problem.mu + v)),
      clean,
    );
  }
  const data = clean.map((v) => v + problem.sigma * problem.normal());
  // Evaluate at a point near (not at) the optimum: ξ_true perturbed by 1 %.
  const xi = problem.xiTrue.map((v) => v + 0.01 * problem.normal());
  const direction = new Float64Array(n * n).map(() => problem.normal() / Math.sqrt(n * n));
  const f64 = makeObjective(problem, 'float64', data);
  const f32 = makeObjective(problem, 'float32', data);
  const g64 = new Float64Array(n * n),
    g32 = new Float64Array(n * n),
    scratch = new Float64Array(n * n);
  const v64 = f64.value(xi, g64);
  const v32 = f32.value(xi, g32);
  let diff = 0,
    norm = 0,
    gv64 = 0,
    gv32 = 0;
  for (let i = 0; i < g64.length; i++) {
    diff += (g32[i]! - g64[i]!) ** 2;
    norm += g64[i]! ** 2;
    gv64 += g64[i]! * direction[i]!;
    gv32 += g32[i]! * direction[i]!;
  }
  const lines = [
    `${n}×${n}, diffuse ≈ 100σ: f = ${v64.toFixed(3)} (float64); float32 − float64 = ${(v32 - v64).toExponential(2)} nats`,
    `  gradient: ‖g32 − g64‖ / ‖g64‖ = ${Math.sqrt(diff / norm).toExponential(2)}; gᵀv: float64 ${gv64.toExponential(6)}, float32 ${gv32.toExponential(6)}`,
  ];
  const shifted = new Float64Array(n * n);
  const at = (objective: Objective, eps: number) => {
    for (let i = 0; i < xi.length; i++) shifted[i] = xi[i]! + eps * direction[i]!;
    return objective.value(shifted, scratch);
  };
  const header =
    '  | ε | Δf = f(ξ+εv) − f(ξ), f64 | rel. error vs ε gᵀv, f64 | same, f32 | central FD / gᵀv − 1, f64 | same, f32 |';
  lines.push(header, '  | --- | --- | --- | --- | --- | --- |');
  for (const eps of [1e-1, 1e-2, 1e-3, 1e-4, 1e-5, 1e-6]) {
    const d64 = at(f64, eps) - v64;
    const d32 = at(f32, eps) - v32;
    const fd64 = (at(f64, eps) - at(f64, -eps)) / (2 * eps);
    const fd32 = (at(f32, eps) - at(f32, -eps)) / (2 * eps);
    lines.push(
      `  | ${eps.toExponential(0)} | ${d64.toExponential(3)} | ${Math.abs((d64 - eps * gv64) / (eps * gv64)).toExponential(1)} | ` +
        `${Math.abs((d32 - eps * gv32) / (eps * gv32)).toExponential(1)} | ${(fd64 / gv64 - 1).toExponential(1)} | ${(fd32 / gv32 - 1).toExponential(1)} |`,
    );
  }
  f64.dispose();
  f32.dispose();
  return { size: n, lines };
}

if (process.argv[1]?.endsWith('precision.ts')) {
  for (const n of (process.argv[2] ?? '256,512').split(',').map(Number))
    console.log(comparePrecision(n).lines.join('\n'));
}
