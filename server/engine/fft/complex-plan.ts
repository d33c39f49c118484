/**
 * Batched complex FFT of one length n in float64, split real/imaginary arrays.
 *
 * Maths: forward X[k] = Σ_j x[j] exp(−2πi jk/n), unnormalised. The inverse (sign +, unnormalised) is the forward
 * transform with the real and imaginary arrays swapped on input and output: swap(z) = i·conj(z), so
 * swap(F(swap(z))) = conj-sign transform of z. Callers scale by 1/n themselves.
 *
 * Method: self-sorting Stockham decimation in frequency (no bit reversal), mixed radix. The length is factored
 * into radices 4, 2, 3, 5 and, for any other prime p, a generic O(p²) butterfly, so every length works but only
 * 2,3,5-smooth lengths are fast. Stage with sub-length L, radix p, stride s (L·s = n), m = L/p:
 *   a_r = x[q + s(j + r m)],  y[q + s(p j + t)] = (Σ_r a_r ω_p^{rt}) · exp(−2πi j t / L)
 * for j < m, q < s, t < p; the next stage has L/p and s·p. (Stockham's autosort formulation, e.g. C. Van Loan,
 * "Computational Frameworks for the Fast Fourier Transform", SIAM 1992, §1.7.)
 *
 * Batching: a "batch" of B transforms is done at once. Element (position i, transform b) of a buffer lives at
 * offset + i·ps + b; the innermost loop runs over b, contiguous in memory. Rows of an image: B = 1, ps = 1.
 * A block of B columns of a row-major image with row length W: ps = W. The work buffers are compact (ps = B).
 */

export interface ComplexPlan {
  readonly n: number;
  readonly radices: readonly number[];
  /** Twiddles per stage, entry j·(p−1) + (t−1) = exp(−2πi j t / L). */
  readonly twiddleRe: readonly Float64Array[];
  readonly twiddleIm: readonly Float64Array[];
}

/** Factor n into radices: fours first, then a two, then threes, fives, then other primes. */
function factorRadices(n: number): number[] {
  const radices: number[] = [];
  let rest = n;
  while (rest % 4 === 0) {
    radices.push(4);
    rest /= 4;
  }
  if (rest % 2 === 0) {
    radices.push(2);
    rest /= 2;
  }
  for (let p = 3; rest > 1; p += 2) {
    while (rest % p === 0) {
      radices.push(p);
      rest /= p;
    }
    if (p * p > rest && rest > 1) {
      radices.push(rest);
      rest = 1;
    }
  }
  return radices;
}

export function createComplexPlan(n: number): ComplexPlan {
  const radices = factorRadices(n);
  const twiddleRe: Float64Array[] = [];
  const twiddleIm: Float64Array[] = [];
  let length = n;
  for (const p of radices) {
    const m = length / p;
    const re = new Float64Array(m * (p - 1));
    const im = new Float64Array(m * (p - 1));
    for (let j = 0; j < m; j++) {
      for (let t = 1; t < p; t++) {
        const angle = (-2 * Math.PI * ((j * t) % length)) / length;
        re[j * (p - 1) + t - 1] = Math.cos(angle);
        im[j * (p - 1) + t - 1] = Math.sin(angle);
      }
    }
    twiddleRe.push(re);
    twiddleIm.push(im);
    length = m;
  }
  return { n, radices, twiddleRe, twiddleIm };
}

/** A strided view: element (i, b) at offset + i·ps + b. */
interface View {
  re: Float64Array;
  im: Float64Array;
  offset: number;
  ps: number;
}

/**
 * Forward transform of `batch` sequences from `in` to `out` (strided views, see above), using compact work
 * buffers of at least n·batch elements. `in` may equal `out` (same arrays, offset and stride); otherwise `in` is
 * left unchanged.
 */
export function complexForward(
  plan: ComplexPlan,
  batch: number,
  inRe: Float64Array,
  inIm: Float64Array,
  inOffset: number,
  inStride: number,
  outRe: Float64Array,
  outIm: Float64Array,
  outOffset: number,
  outStride: number,
  workRe: Float64Array,
  workIm: Float64Array,
): void {
  const stages = plan.radices.length;
  const n = plan.n;
  const source: View = { re: inRe, im: inIm, offset: inOffset, ps: inStride };
  const output: View = { re: outRe, im: outIm, offset: outOffset, ps: outStride };
  const work: View = { re: workRe, im: workIm, offset: 0, ps: batch };
  if (stages === 0) {
    copyView(source, output, n, batch);
    return;
  }
  const inPlace = inRe === outRe && inIm === outIm && inOffset === outOffset && inStride === outStride;
  // Destinations alternate so that the last stage lands in `out`; an in-place call with an odd stage count
  // would overwrite its input in stage 0, so it ends in `work` and copies back instead.
  const endInWork = inPlace && stages % 2 === 1;
  let from = source;
  let length = n;
  let stride = 1;
  for (let stage = 0; stage < stages; stage++) {
    const remaining = stages - 1 - stage;
    const toOut = endInWork ? remaining % 2 === 1 : remaining % 2 === 0;
    const to = toOut ? output : work;
    const p = plan.radices[stage]!;
    const twRe = plan.twiddleRe[stage]!;
    const twIm = plan.twiddleIm[stage]!;
    if (p === 4) radix4(length, stride, batch, from, to, twRe, twIm);
    else if (p === 2) radix2(length, stride, batch, from, to, twRe, twIm);
    else if (p === 3) radix3(length, stride, batch, from, to, twRe, twIm);
    else if (p === 5) radix5(length, stride, batch, from, to, twRe, twIm);
    else radixGeneric(p, length, stride, batch, from, to, twRe, twIm);
    from = to;
    length /= p;
    stride *= p;
  }
  if (endInWork) copyView(work, output, n, batch);
}

function copyView(from: View, to: View, n: number, batch: number): void {
  if (from.re === to.re && from.offset === to.offset && from.ps === to.ps) return;
  for (let i = 0; i < n; i++) {
    const a = from.offset + i * from.ps;
    const c = to.offset + i * to.ps;
    for (let b = 0; b < batch; b++) {
      to.re[c + b] = from.re[a + b]!;
      to.im[c + b] = from.im[a + b]!;
    }
  }
}

function radix2(
  L: number,
  s: number,
  batch: number,
  x: View,
  y: View,
  twRe: Float64Array,
  twIm: Float64Array,
) {
  const m = L / 2;
  const xr = x.re,
    xi = x.im,
    yr = y.re,
    yi = y.im;
  const xStep = s * m * x.ps;
  const yStep = s * y.ps;
  for (let j = 0; j < m; j++) {
    const w1r = twRe[j]!,
      w1i = twIm[j]!;
    for (let q = 0; q < s; q++) {
      const xa = x.offset + (q + s * j) * x.ps;
      const ya = y.offset + (q + s * 2 * j) * y.ps;
      for (let b = 0; b < batch; b++) {
        const i0 = xa + b,
          i1 = i0 + xStep;
        const ar = xr[i0]!,
          ai = xi[i0]!,
          br = xr[i1]!,
          bi = xi[i1]!;
        const o0 = ya + b,
          o1 = o0 + yStep;
        yr[o0] = ar + br;
        yi[o0] = ai + bi;
        const dr = ar - br,
          di = ai - bi;
        yr[o1] = dr * w1r - di * w1i;
        yi[o1] = dr * w1i + di * w1r;
      }
    }
  }
}

function radix4(
  L: number,
  s: number,
  batch: number,
  x: View,
  y: View,
  twRe: Float64Array,
  twIm: Float64Array,
) {
  const m = L / 4;
  const xr = x.re,
    xi = x.im,
    yr = y.re,
    yi = y.im;
  const xStep = s * m * x.ps;
  const yStep = s * y.ps;
  for (let j = 0; j < m; j++) {
    const w1r = twRe[3 * j]!,
      w1i = twIm[3 * j]!;
    const w2r = twRe[3 * j + 1]!,
      w2i = twIm[3 * j + 1]!;
    const w3r = twRe[3 * j + 2]!,
      w3i = twIm[3 * j + 2]!;
    for (let q = 0; q < s; q++) {
      const xa = x.offset + (q + s * j) * x.ps;
      const ya = y.offset + (q + s * 4 * j) * y.ps;
      for (let b = 0; b < batch; b++) {
        const i0 = xa + b,
          i1 = i0 + xStep,
          i2 = i1 + xStep,
          i3 = i2 + xStep;
        const a0r = xr[i0]!,
          a0i = xi[i0]!,
          a1r = xr[i1]!,
          a1i = xi[i1]!;
        const a2r = xr[i2]!,
          a2i = xi[i2]!,
          a3r = xr[i3]!,
          a3i = xi[i3]!;
        const s02r = a0r + a2r,
          s02i = a0i + a2i,
          d02r = a0r - a2r,
          d02i = a0i - a2i;
        const s13r = a1r + a3r,
          s13i = a1i + a3i,
          d13r = a1r - a3r,
          d13i = a1i - a3i;
        const o0 = ya + b,
          o1 = o0 + yStep,
          o2 = o1 + yStep,
          o3 = o2 + yStep;
        yr[o0] = s02r + s13r;
        yi[o0] = s02i + s13i;
        // b1 = (a0 − a2) − i(a1 − a3); b3 = (a0 − a2) + i(a1 − a3)
        const b1r = d02r + d13i,
          b1i = d02i - d13r;
        const b2r = s02r - s13r,
          b2i = s02i - s13i;
        const b3r = d02r - d13i,
          b3i = d02i + d13r;
        yr[o1] = b1r * w1r - b1i * w1i;
        yi[o1] = b1r * w1i + b1i * w1r;
        yr[o2] = b2r * w2r - b2i * w2i;
        yi[o2] = b2r * w2i + b2i * w2r;
        yr[o3] = b3r * w3r - b3i * w3i;
        yi[o3] = b3r * w3i + b3i * w3r;
      }
    }
  }
}

const SIN_60 = Math.sqrt(3) / 2;

function radix3(
  L: number,
  s: number,
  batch: number,
  x: View,
  y: View,
  twRe: Float64Array,
  twIm: Float64Array,
) {
  const m = L / 3;
  const xr = x.re,
    xi = x.im,
    yr = y.re,
    yi = y.im;
  const xStep = s * m * x.ps;
  const yStep = s * y.ps;
  for (let j = 0; j < m; j++) {
    const w1r = twRe[2 * j]!,
      w1i = twIm[2 * j]!;
    const w2r = twRe[2 * j + 1]!,
      w2i = twIm[2 * j + 1]!;
    for (let q = 0; q < s; q++) {
      const xa = x.offset + (q + s * j) * x.ps;
      const ya = y.offset + (q + s * 3 * j) * y.ps;
      for (let b = 0; b < batch; b++) {
        const i0 = xa + b,
          i1 = i0 + xStep,
          i2 = i1 + xStep;
        const a0r = xr[i0]!,
          a0i = xi[i0]!,
          a1r = xr[i1]!,
          a1i = xi[i1]!,
          a2r = xr[i2]!,
          a2i = xi[i2]!;
        const tr = a1r + a2r,
          ti = a1i + a2i;
        const mr = a0r - 0.5 * tr,
          mi = a0i - 0.5 * ti;
        const dr = SIN_60 * (a1r - a2r),
          di = SIN_60 * (a1i - a2i);
        // b1 = m − i·d, b2 = m + i·d
        const b1r = mr + di,
          b1i = mi - dr,
          b2r = mr - di,
          b2i = mi + dr;
        const o0 = ya + b,
          o1 = o0 + yStep,
          o2 = o1 + yStep;
        yr[o0] = a0r + tr;
        yi[o0] = a0i + ti;
        yr[o1] = b1r * w1r - b1i * w1i;
        yi[o1] = b1r * w1i + b1i * w1r;
        yr[o2] = b2r * w2r - b2i * w2i;
        yi[o2] = b2r * w2i + b2i * w2r;
      }
    }
  }
}

const C1 = Math.cos((2 * Math.PI) / 5);
const C2 = Math.cos((4 * Math.PI) / 5);
const S1 = Math.sin((2 * Math.PI) / 5);
const S2 = Math.sin((4 * Math.PI) / 5);

function radix5(
  L: number,
  s: number,
  batch: number,
  x: View,
  y: View,
  twRe: Float64Array,
  twIm: Float64Array,
) {
  const m = L / 5;
  const xr = x.re,
    xi = x.im,
    yr = y.re,
    yi = y.im;
  const xStep = s * m * x.ps;
  const yStep = s * y.ps;
  for (let j = 0; j < m; j++) {
    const w1r = twRe[4 * j]!,
      w1i = twIm[4 * j]!;
    const w2r = twRe[4 * j + 1]!,
      w2i = twIm[4 * j + 1]!;
    const w3r = twRe[4 * j + 2]!,
      w3i = twIm[4 * j + 2]!;
    const w4r = twRe[4 * j + 3]!,
      w4i = twIm[4 * j + 3]!;
    for (let q = 0; q < s; q++) {
      const xa = x.offset + (q + s * j) * x.ps;
      const ya = y.offset + (q + s * 5 * j) * y.ps;
      for (let b = 0; b < batch; b++) {
        const i0 = xa + b,
          i1 = i0 + xStep,
          i2 = i1 + xStep,
          i3 = i2 + xStep,
          i4 = i3 + xStep;
        const a0r = xr[i0]!,
          a0i = xi[i0]!;
        const t1r = xr[i1]! + xr[i4]!,
          t1i = xi[i1]! + xi[i4]!;
        const t2r = xr[i2]! + xr[i3]!,
          t2i = xi[i2]! + xi[i3]!;
        const t3r = xr[i1]! - xr[i4]!,
          t3i = xi[i1]! - xi[i4]!;
        const t4r = xr[i2]! - xr[i3]!,
          t4i = xi[i2]! - xi[i3]!;
        const p1r = a0r + C1 * t1r + C2 * t2r,
          p1i = a0i + C1 * t1i + C2 * t2i;
        const p2r = a0r + C2 * t1r + C1 * t2r,
          p2i = a0i + C2 * t1i + C1 * t2i;
        // q1 = S1 t3 + S2 t4, q2 = S2 t3 − S1 t4; b1 = p1 − i q1, b4 = p1 + i q1, b2 = p2 − i q2, b3 = p2 + i q2
        const q1r = S1 * t3r + S2 * t4r,
          q1i = S1 * t3i + S2 * t4i;
        const q2r = S2 * t3r - S1 * t4r,
          q2i = S2 * t3i - S1 * t4i;
        const b1r = p1r + q1i,
          b1i = p1i - q1r,
          b4r = p1r - q1i,
          b4i = p1i + q1r;
        const b2r = p2r + q2i,
          b2i = p2i - q2r,
          b3r = p2r - q2i,
          b3i = p2i + q2r;
        const o0 = ya + b,
          o1 = o0 + yStep,
          o2 = o1 + yStep,
          o3 = o2 + yStep,
          o4 = o3 + yStep;
        yr[o0] = a0r + t1r + t2r;
        yi[o0] = a0i + t1i + t2i;
        yr[o1] = b1r * w1r - b1i * w1i;
        yi[o1] = b1r * w1i + b1i * w1r;
        yr[o2] = b2r * w2r - b2i * w2i;
        yi[o2] = b2r * w2i + b2i * w2r;
        yr[o3] = b3r * w3r - b3i * w3i;
        yi[o3] = b3r * w3i + b3i * w3r;
        yr[o4] = b4r * w4r - b4i * w4i;
        yi[o4] = b4r * w4i + b4i * w4r;
      }
    }
  }
}

/** Any radix p by a direct p-point DFT (O(p²) per butterfly); only reached for lengths with a prime factor > 5. */
function radixGeneric(
  p: number,
  L: number,
  s: number,
  batch: number,
  x: View,
  y: View,
  twRe: Float64Array,
  twIm: Float64Array,
) {
  const m = L / p;
  const rootRe = new Float64Array(p);
  const rootIm = new Float64Array(p);
  for (let r = 0; r < p; r++) {
    rootRe[r] = Math.cos((-2 * Math.PI * r) / p);
    rootIm[r] = Math.sin((-2 * Math.PI * r) / p);
  }
  const xStep = s * m * x.ps;
  const yStep = s * y.ps;
  for (let j = 0; j < m; j++) {
    for (let q = 0; q < s; q++) {
      const xa = x.offset + (q + s * j) * x.ps;
      const ya = y.offset + (q + s * p * j) * y.ps;
      for (let b = 0; b < batch; b++) {
        for (let t = 0; t < p; t++) {
          let sr = 0;
          let si = 0;
          for (let r = 0; r < p; r++) {
            const k = (r * t) % p;
            const ar = x.re[xa + b + r * xStep]!,
              ai = x.im[xa + b + r * xStep]!;
            sr += ar * rootRe[k]! - ai * rootIm[k]!;
            si += ar * rootIm[k]! + ai * rootRe[k]!;
          }
          const o = ya + b + t * yStep;
          if (t === 0) {
            y.re[o] = sr;
            y.im[o] = si;
          } else {
            const wr = twRe[j * (p - 1) + t - 1]!,
              wi = twIm[j * (p - 1) + t - 1]!;
            y.re[o] = sr * wr - si * wi;
            y.im[o] = sr * wi + si * wr;
          }
        }
      }
    }
  }
}
