/**
 * Limited-memory BFGS (L-BFGS) for smooth unconstrained minimisation on Float64Array, with a line search that
 * enforces the strong Wolfe conditions.
 *
 * Method (J. Nocedal & S. J. Wright, Numerical Optimization, 2nd ed., Springer 2006):
 * - search direction p = −H·g by the two-loop recursion (Algorithm 7.4) over the last `memory` pairs
 *   (s = x_{k+1} − x_k, y = g_{k+1} − g_k), with the initial matrix H0 = γ I, γ = sᵀy / yᵀy (eq. 7.20);
 *   a pair with sᵀy ≤ 1e-12·|s||y| is skipped so H stays positive definite (when the memory is full, the oldest
 *   pair it was written over is dropped); the pairs are stored in single precision (see below);
 * - step length by Algorithm 3.5 (bracketing) and Algorithm 3.6 ("zoom"), trial steps chosen by safeguarded cubic
 *   interpolation (section 3.5, eq. 3.59), accepting α only when
 *     f(x + αp) ≤ f(x) + c1 α gᵀp          (sufficient decrease)  and
 *     |g(x + αp)ᵀp| ≤ c2 |gᵀp|              (strong curvature condition);
 * - first step α0 = min(1, 1/|g|) (the direction is then unscaled), α0 = 1 afterwards.
 *
 * Stopping: the gradient norm |g|₂ ≤ gradientTolerance; or the objective decreased by less than
 * `absoluteDecrease` in `stallIterations` consecutive iterations (an absolute test, because objectives like a
 * negative log posterior are of the order of the pixel count and a relative tolerance never fires); or the
 * iteration / evaluation budget is spent; or the line search cannot make progress (after one restart along −g);
 * or the caller's `stopWhen` says so (a convergence test on what the caller computes from x).
 *
 * Cancellation: `signal` is checked before every evaluation; an aborted signal throws its reason
 * (an AbortError DOMException by default), leaving no partial result.
 * Deterministic: no randomness, and the arithmetic order is fixed.
 */

export type ObjectiveAndGradient = (x: Float64Array, grad: Float64Array) => number;

export interface LbfgsProgress {
  iteration: number;
  objective: number;
  gradNorm: number;
  evaluations: number;
}

export interface LbfgsOptions {
  /** Number of correction pairs kept. @default 8 */
  memory?: number;
  /** Stop after this many iterations. @default 1000 */
  maxIterations?: number;
  /** Stop after this many objective evaluations. @default 4000 */
  maxEvaluations?: number;
  /** Stop when |g|₂ is at or below this. @default 1e-8 */
  gradientTolerance?: number;
  /** Stop when f decreased by less than this in `stallIterations` consecutive iterations. @default 0 (off) */
  absoluteDecrease?: number;
  /** How many consecutive small decreases stop the run. @default 3 */
  stallIterations?: number;
  /** Sufficient-decrease constant c1 of the Wolfe conditions. @default 1e-4 */
  c1?: number;
  /** Curvature constant c2 of the strong Wolfe conditions (0 < c1 < c2 < 1). @default 0.9 */
  c2?: number;
  /** Most trial steps in one line search. @default 25 */
  maxLineSearchSteps?: number;
  /** Called after each accepted iteration. */
  onProgress?: (progress: LbfgsProgress) => void;
  /**
   * Called after each accepted iteration, after onProgress, with the new iterate (do not keep or modify it);
   * returning true stops the run as converged (reason 'caller-converged'), e.g. when a quantity the caller cares
   * about has stopped changing.
   */
  stopWhen?: (progress: LbfgsProgress, x: Float64Array) => boolean;
  /** Cancels the run: the next evaluation throws the signal's reason. */
  signal?: AbortSignal;
  /** Buffers to take the run's vectors from and to leave for the next run (LbfgsWorkspace). */
  workspace?: LbfgsWorkspace;
}

/**
 * The vectors of minimiseLbfgs runs made one after another (a staged fit's stages), kept between them: the
 * iterate, the gradient, the direction, the line search's trial point and gradient, and the correction pairs.
 * Without it every run allocates them anew and leaves the last run's to the collector, which at 4096² (3.5·10⁶
 * variables) is about 0.4 GB alive twice over. A run of n variables uses the first n entries of each buffer;
 * a buffer grows (is replaced) when a run needs more. The result's x and grad are views into the buffers,
 * valid until the next run with the same workspace.
 */
export class LbfgsWorkspace {
  private readonly doubles: Float64Array[] = [];
  private readonly singles: Float32Array[] = [];

  /** Buffer `slot` as n float64 entries (contents undefined). */
  float64(slot: number, n: number): Float64Array {
    return take(this.doubles, slot, n, Float64Array);
  }

  /** Drops every buffer (for the collector; the workspace can be used again). */
  release(): void {
    this.doubles.length = 0;
    this.singles.length = 0;
  }

  /** Buffer `slot` as n float32 entries (contents undefined). */
  float32(slot: number, n: number): Float32Array {
    return take(this.singles, slot, n, Float32Array);
  }
}

/** The first n entries of pool[slot], replacing it with a new array when it is shorter. */
function take<T extends Float32Array | Float64Array>(
  pool: T[],
  slot: number,
  n: number,
  Make: new (length: number) => T,
): T {
  const have = pool[slot];
  if (have && have.length >= n) return have.subarray(0, n) as T;
  const fresh = new Make(n);
  pool[slot] = fresh;
  return fresh;
}

export type LbfgsReason =
  | 'gradient-tolerance'
  | 'absolute-decrease'
  | 'caller-converged'
  | 'max-iterations'
  | 'max-evaluations'
  | 'line-search-failed';

export interface LbfgsResult {
  x: Float64Array;
  f: number;
  /** Gradient at x. */
  grad: Float64Array;
  gradNorm: number;
  iterations: number;
  evaluations: number;
  /** True when a tolerance (gradient, absolute decrease, or the caller's stopWhen) was met. */
  converged: boolean;
  reason: LbfgsReason;
}

type ResolvedOptions = Required<Omit<LbfgsOptions, 'onProgress' | 'signal' | 'stopWhen' | 'workspace'>> &
  Pick<LbfgsOptions, 'onProgress' | 'signal' | 'stopWhen'>;

function isPositiveInteger(v: number): boolean {
  return Number.isInteger(v) && v > 0;
}

/** Applies defaults and rejects out-of-range options with a specific message. */
export function checkOptions(options: LbfgsOptions = {}): ResolvedOptions {
  const o: ResolvedOptions = {
    memory: options.memory ?? 8,
    maxIterations: options.maxIterations ?? 1000,
    maxEvaluations: options.maxEvaluations ?? 4000,
    gradientTolerance: options.gradientTolerance ?? 1e-8,
    absoluteDecrease: options.absoluteDecrease ?? 0,
    stallIterations: options.stallIterations ?? 3,
    c1: options.c1 ?? 1e-4,
    c2: options.c2 ?? 0.9,
    maxLineSearchSteps: options.maxLineSearchSteps ?? 25,
    onProgress: options.onProgress,
    stopWhen: options.stopWhen,
    signal: options.signal,
  };
  if (!isPositiveInteger(o.memory))
    throw new Error(`L-BFGS memory must be a positive integer (got ${o.memory})`);
  if (!isPositiveInteger(o.maxIterations)) {
    throw new Error(`L-BFGS maxIterations must be a positive integer (got ${o.maxIterations})`);
  }
  if (!isPositiveInteger(o.maxEvaluations)) {
    throw new Error(`L-BFGS maxEvaluations must be a positive integer (got ${o.maxEvaluations})`);
  }
  if (!(o.gradientTolerance >= 0)) {
    throw new Error(`L-BFGS gradientTolerance must be ≥ 0 (got ${o.gradientTolerance})`);
  }
  if (!(o.absoluteDecrease >= 0)) {
    throw new Error(`L-BFGS absoluteDecrease must be ≥ 0 (got ${o.absoluteDecrease})`);
  }
  if (!isPositiveInteger(o.stallIterations)) {
    throw new Error(`L-BFGS stallIterations must be a positive integer (got ${o.stallIterations})`);
  }
  if (!(o.c1 > 0 && o.c1 < o.c2 && o.c2 < 1)) {
    throw new Error(`L-BFGS line-search constants need 0 < c1 < c2 < 1 (got c1 = ${o.c1}, c2 = ${o.c2})`);
  }
  if (!isPositiveInteger(o.maxLineSearchSteps)) {
    throw new Error(`L-BFGS maxLineSearchSteps must be a positive integer (got ${o.maxLineSearchSteps})`);
  }
  return o;
}

function dot(a: Float64Array, b: Float64Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i]! * b[i]!;
  return s;
}

// Small kernels of the two-loop recursion. Kept as separate functions: V8 optimises (and inlines) a short loop
// in its own function far better than the same loop inside the long minimiseLbfgs (measured ~1.5–2× at 10⁵).

/** p = −g; returns Σ s·p. */
function negateDot(g: Float64Array, p: Float64Array, s: Float32Array): number {
  let d = 0;
  for (let i = 0; i < p.length; i++) {
    const v = -g[i]!;
    p[i] = v;
    d += s[i]! * v;
  }
  return d;
}

/** p = −g; returns Σ g·p = −|g|². */
function negate(g: Float64Array, p: Float64Array): number {
  let d = 0;
  for (let i = 0; i < p.length; i++) {
    const v = -g[i]!;
    p[i] = v;
    d += g[i]! * v;
  }
  return d;
}

/**
 * p = p + a·y; returns Σ s·p (the updated p). The recursion's hot loop (2·(memory − 1) calls per iteration), so
 * it keeps four partial sums (lanes i mod 4, added as (d0 + d1) + (d2 + d3)): with one running sum every
 * addition waits for the last, and four ran 1.3–1.4× faster at 2·10⁴ to 3.5·10⁶ entries (measured here, one
 * run each). The order is fixed, so the result stays deterministic.
 */
function axpyDot(p: Float64Array, a: number, y: Float32Array, s: Float32Array): number {
  const n = p.length;
  let d0 = 0;
  let d1 = 0;
  let d2 = 0;
  let d3 = 0;
  let i = 0;
  for (; i + 3 < n; i += 4) {
    const v0 = p[i]! + a * y[i]!;
    const v1 = p[i + 1]! + a * y[i + 1]!;
    const v2 = p[i + 2]! + a * y[i + 2]!;
    const v3 = p[i + 3]! + a * y[i + 3]!;
    p[i] = v0;
    p[i + 1] = v1;
    p[i + 2] = v2;
    p[i + 3] = v3;
    d0 += s[i]! * v0;
    d1 += s[i + 1]! * v1;
    d2 += s[i + 2]! * v2;
    d3 += s[i + 3]! * v3;
  }
  for (; i < n; i++) {
    const v = p[i]! + a * y[i]!;
    p[i] = v;
    d0 += s[i]! * v;
  }
  return d0 + d1 + (d2 + d3);
}

/** p = p + a·s; returns Σ g·p (the updated p): the last step of the second loop. */
function axpyDotGradient(p: Float64Array, a: number, s: Float32Array, g: Float64Array): number {
  let d = 0;
  for (let i = 0; i < p.length; i++) {
    const v = p[i]! + a * s[i]!;
    p[i] = v;
    d += g[i]! * v;
  }
  return d;
}

/** p = (p + a·y)·γ; returns Σ y·p (the updated p). */
function axpyScaleDot(p: Float64Array, a: number, y: Float32Array, gamma: number): number {
  let d = 0;
  for (let i = 0; i < p.length; i++) {
    const v = (p[i]! + a * y[i]!) * gamma;
    p[i] = v;
    d += y[i]! * v;
  }
  return d;
}

/** out = x + α·p. */
function stepTo(x: Float64Array, alpha: number, p: Float64Array, out: Float64Array): void {
  for (let i = 0; i < x.length; i++) out[i] = x[i]! + alpha * p[i]!;
}

/**
 * The correction pair s = xNew − x, y = gNew − g written into sk, yk (single precision); returns sᵀy, sᵀs, yᵀy
 * of the stored (rounded) values and |gNew|² in sums[0..3].
 */
function correctionPair(
  x: Float64Array,
  g: Float64Array,
  xNew: Float64Array,
  gNew: Float64Array,
  sk: Float32Array,
  yk: Float32Array,
  sums: Float64Array,
): void {
  let sy = 0;
  let ss = 0;
  let yy = 0;
  let gg = 0;
  for (let i = 0; i < x.length; i++) {
    const gi = gNew[i]!;
    const si = Math.fround(xNew[i]! - x[i]!);
    const yi = Math.fround(gi - g[i]!);
    sk[i] = si;
    yk[i] = yi;
    sy += si * yi;
    ss += si * si;
    yy += yi * yi;
    gg += gi * gi;
  }
  sums[0] = sy;
  sums[1] = ss;
  sums[2] = yy;
  sums[3] = gg;
}

/**
 * Minimiser of the cubic through (a, fa, da) and (b, fb, db), clamped into [lo + 0.1·w, hi − 0.1·w] of the
 * interval between a and b (eq. 3.59 of Nocedal & Wright; the bisection fallback when the cubic has no minimum).
 */
function cubicStep(a: number, fa: number, da: number, b: number, fb: number, db: number): number {
  const lo = Math.min(a, b);
  const hi = Math.max(a, b);
  const w = hi - lo;
  const d1 = da + db - (3 * (fa - fb)) / (a - b);
  const disc = d1 * d1 - da * db;
  let t = (a + b) / 2;
  if (disc >= 0) {
    const d2 = Math.sign(b - a) * Math.sqrt(disc);
    const denom = db - da + 2 * d2;
    if (denom !== 0) {
      const c = b - (b - a) * ((db + d2 - d1) / denom);
      if (Number.isFinite(c)) t = c;
    }
  }
  return Math.min(Math.max(t, lo + 0.1 * w), hi - 0.1 * w);
}

interface LineSearchState {
  /** trial point and its gradient (outputs) */
  xNew: Float64Array;
  gNew: Float64Array;
  fNew: number;
  alpha: number;
  evaluations: number;
}

/**
 * Algorithm 3.5 (bracketing) with Algorithm 3.6 (zoom). Returns true when a step satisfying the strong Wolfe
 * conditions was found; the trial point is then in state.xNew / gNew / fNew.
 */
function strongWolfeLineSearch(
  fg: ObjectiveAndGradient,
  x: Float64Array,
  f0: number,
  dg0: number,
  p: Float64Array,
  alpha0: number,
  o: ResolvedOptions,
  budget: number,
  state: LineSearchState,
): boolean {
  const { xNew, gNew } = state;
  state.evaluations = 0;
  const phi = (alpha: number): [number, number] => {
    o.signal?.throwIfAborted();
    stepTo(x, alpha, p, xNew);
    const f = fg(xNew, gNew);
    state.evaluations++;
    return [f, dot(gNew, p)];
  };
  const accept = (alpha: number, f: number): boolean => {
    state.alpha = alpha;
    state.fNew = f;
    return true;
  };

  const zoom = (aLo: number, fLo: number, dLo: number, aHi: number, fHi: number, dHi: number): boolean => {
    while (state.evaluations < o.maxLineSearchSteps && state.evaluations < budget) {
      if (Math.abs(aHi - aLo) <= 1e-14 * Math.max(1, Math.abs(aLo))) break;
      const a = cubicStep(aLo, fLo, dLo, aHi, fHi, dHi);
      const [fa, da] = phi(a);
      if (!Number.isFinite(fa) || fa > f0 + o.c1 * a * dg0 || fa >= fLo) {
        aHi = a;
        fHi = Number.isFinite(fa) ? fa : Number.MAX_VALUE;
        dHi = Number.isFinite(da) ? da : 0;
      } else {
        if (Math.abs(da) <= -o.c2 * dg0) return accept(a, fa);
        if (da * (aHi - aLo) >= 0) {
          aHi = aLo;
          fHi = fLo;
          dHi = dLo;
        }
        aLo = a;
        fLo = fa;
        dLo = da;
      }
    }
    return false;
  };

  let aPrev = 0;
  let fPrev = f0;
  let dPrev = dg0;
  let a = alpha0;
  for (let i = 0; state.evaluations < o.maxLineSearchSteps && state.evaluations < budget; i++) {
    const [fa, da] = phi(a);
    if (!Number.isFinite(fa)) {
      // Stepped out of the objective's domain: bracket with the finite side and shrink.
      return zoom(aPrev, fPrev, dPrev, a, Number.MAX_VALUE, 0);
    }
    if (fa > f0 + o.c1 * a * dg0 || (i > 0 && fa >= fPrev)) return zoom(aPrev, fPrev, dPrev, a, fa, da);
    if (Math.abs(da) <= -o.c2 * dg0) return accept(a, fa);
    if (da >= 0) return zoom(a, fa, da, aPrev, fPrev, dPrev);
    aPrev = a;
    fPrev = fa;
    dPrev = da;
    a *= 4;
  }
  return false;
}

/**
 * Minimises fg from x0 (not modified).
 * @param fg returns f(x) and writes ∇f(x) into grad (same length as x).
 */
export function minimiseLbfgs(
  fg: ObjectiveAndGradient,
  x0: Float64Array,
  options: LbfgsOptions = {},
): LbfgsResult {
  const o = checkOptions(options);
  const n = x0.length;
  if (n === 0) throw new Error('L-BFGS needs at least one variable');
  const m = o.memory;
  // Workspaces, allocated once per run (or taken from options.workspace): the iterate and its gradient swap
  // places with the line search's trial point instead of being copied.
  const space = options.workspace ?? new LbfgsWorkspace();
  let x: Float64Array = space.float64(0, n);
  x.set(x0);
  let g: Float64Array = space.float64(1, n).fill(0);
  const p = space.float64(2, n);
  // The correction pairs are kept in single precision: they only shape the search direction (the iterate, the
  // gradient and every dot product stay in double), and the two-loop recursion over them is limited by memory
  // bandwidth at 10⁶ variables, so half the bytes is nearly half the time.
  const sHist = Array.from({ length: m }, (_, j) => space.float32(j, n));
  const yHist = Array.from({ length: m }, (_, j) => space.float32(m + j, n));
  const rho = new Float64Array(m);
  /** yᵀy of each stored pair (for γ), computed once when the pair is stored. */
  const yyHist = new Float64Array(m);
  const alphaHist = new Float64Array(m);
  const sums = new Float64Array(4);
  const state: LineSearchState = {
    xNew: space.float64(3, n),
    gNew: space.float64(4, n).fill(0),
    fNew: 0,
    alpha: 0,
    evaluations: 0,
  };

  o.signal?.throwIfAborted();
  let f = fg(x, g);
  let evaluations = 1;
  if (!Number.isFinite(f))
    throw new Error(`L-BFGS: the objective is not finite at the starting point (got ${f})`);
  let gNorm = Math.sqrt(dot(g, g));
  let stored = 0; // pairs in memory
  let newest = -1; // ring-buffer index of the newest pair
  let stall = 0;
  let iterations = 0;
  let reason: LbfgsReason = 'max-iterations';
  let restarted = false;

  const finish = (r: LbfgsReason): LbfgsResult => ({
    x,
    f,
    grad: g,
    gradNorm: gNorm,
    iterations,
    evaluations,
    converged: r === 'gradient-tolerance' || r === 'absolute-decrease' || r === 'caller-converged',
    reason: r,
  });

  if (gNorm <= o.gradientTolerance) return finish('gradient-tolerance');

  while (iterations < o.maxIterations) {
    // Algorithm 7.4: two-loop recursion, p = −H g. Each pass over the vectors updates p and, in the same sweep,
    // accumulates the dot product the next step needs (the same products as separate passes), so the recursion
    // reads every stored vector once per loop instead of twice.
    let dg0: number;
    if (stored === 0) {
      dg0 = negate(g, p);
    } else {
      let k = newest;
      let d = negateDot(g, p, sHist[k]!);
      const gamma = 1 / (rho[newest]! * yyHist[newest]!);
      for (let j = 0; j < stored; j++) {
        const a = rho[k]! * d;
        alphaHist[k] = a;
        const yk = yHist[k]!;
        if (j < stored - 1) {
          k = (newest - j - 1 + m) % m;
          d = axpyDot(p, -a, yk, sHist[k]!);
        } else {
          // last pair of the first loop: also scale by H0 = γ I and start the second loop at the same pair
          d = axpyScaleDot(p, -a, yk, gamma);
        }
      }
      for (let j = stored - 1; j >= 0; j--) {
        const b = rho[k]! * d;
        const a = alphaHist[k]! - b;
        const sk = sHist[k]!;
        if (j > 0) {
          k = (newest - j + 1 + m) % m;
          d = axpyDot(p, a, sk, yHist[k]!);
        } else {
          d = axpyDotGradient(p, a, sk, g);
        }
      }
      dg0 = d;
    }
    if (!(dg0 < 0)) {
      // Not a descent direction (round-off in H): fall back to steepest descent.
      for (let i = 0; i < n; i++) p[i] = -g[i]!;
      dg0 = -gNorm * gNorm;
      stored = 0;
    }
    const alpha0 = stored === 0 ? Math.min(1, 1 / gNorm) : 1;
    const budget = o.maxEvaluations - evaluations;
    if (budget <= 0) {
      reason = 'max-evaluations';
      break;
    }
    const ok = strongWolfeLineSearch(fg, x, f, dg0, p, alpha0, o, budget, state);
    evaluations += state.evaluations;
    if (!ok) {
      if (evaluations >= o.maxEvaluations) {
        reason = 'max-evaluations';
        break;
      }
      if (!restarted && stored > 0) {
        // Forget the curvature pairs and retry along −g once.
        restarted = true;
        stored = 0;
        continue;
      }
      reason = 'line-search-failed';
      break;
    }
    restarted = false;
    iterations++;
    // New correction pair, its dot products and the new gradient norm in one sweep.
    const slot = (newest + 1) % m;
    const sk = sHist[slot]!;
    const yk = yHist[slot]!;
    const xNew = state.xNew;
    const gNew = state.gNew;
    correctionPair(x, g, xNew, gNew, sk, yk, sums);
    const sy = sums[0]!;
    const ss = sums[1]!;
    const yy = sums[2]!;
    const gg = sums[3]!;
    if (sy > 1e-12 * Math.sqrt(ss * yy)) {
      rho[slot] = 1 / sy;
      yyHist[slot] = yy;
      newest = slot;
      stored = Math.min(stored + 1, m);
    } else if (stored === m) {
      // The rejected pair was written over the oldest stored one: that slot no longer holds a valid pair.
      stored = m - 1;
    }
    const decrease = f - state.fNew;
    // accept the trial point: swap buffers (the old ones become the next line search's workspace)
    state.xNew = x;
    state.gNew = g;
    x = xNew;
    g = gNew;
    f = state.fNew;
    gNorm = Math.sqrt(gg);
    o.onProgress?.({ iteration: iterations, objective: f, gradNorm: gNorm, evaluations });
    if (gNorm <= o.gradientTolerance) return finish('gradient-tolerance');
    stall = decrease < o.absoluteDecrease ? stall + 1 : 0;
    if (stall >= o.stallIterations) return finish('absolute-decrease');
    if (o.stopWhen?.({ iteration: iterations, objective: f, gradNorm: gNorm, evaluations }, x)) {
      return finish('caller-converged');
    }
    if (evaluations >= o.maxEvaluations) {
      reason = 'max-evaluations';
      break;
    }
  }
  return finish(reason);
}
