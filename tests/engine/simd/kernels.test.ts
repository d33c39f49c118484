// @vitest-environment node
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { assembleKernels } from '../../../server/engine/simd/assemble';
import { KERNELS_WASM_BASE64 } from '../../../server/engine/simd/kernels-binary';
import { KernelArena } from '../../../server/engine/simd/kernels';
import { lcg } from '../../support/lcg';

const N = 4096;
function arenaFor(floats32: number, floats64 = 0): KernelArena {
  const arena = KernelArena.create(
    KernelArena.bytesFor(...Array(floats32).fill(4 * N), ...Array(floats64).fill(8 * N)),
  );
  if (arena === null) throw new Error('no WASM SIMD in this runtime');
  return arena;
}

describe('SIMD kernels', () => {
  it('the committed binary is kernels.wat assembled (npm run build:kernels after an edit)', async () => {
    const wat = readFileSync(new URL('../../../server/engine/simd/kernels.wat', import.meta.url), 'utf8');
    expect(await assembleKernels(wat)).toBe(KERNELS_WASM_BASE64);
  });

  it('expScaleAdd: exp to float32 accuracy against Math.exp, total = s + u and its sum', () => {
    const arena = arenaFor(3);
    const [s, u, total] = [arena.float32(N), arena.float32(N), arena.float32(N)];
    const rand = lcg(11);
    // inputs across the whole unclamped range, plus a dense stretch around 0 where most fields live
    const x = Float32Array.from({ length: N }, (_, i) =>
      i < N / 2 ? -86 + (173 * i) / (N / 2) : 8 * rand() - 4,
    );
    for (let i = 0; i < N; i++) u[i] = rand();
    s.set(x);
    const mu = 1.7;
    const scale = Math.fround(Math.exp(mu));
    const sum = arena.expScaleAdd(s, scale, u, total);
    let worst = 0;
    let want = 0;
    for (let i = 0; i < N; i++) {
      // reference: Math.exp in float64 (ECMA-262 leaves its accuracy to the implementation; V8's is fdlibm's,
      // within 1 ulp of double), then e^μ applied as the kernel does
      const reference = Math.exp(x[i]!) * scale;
      worst = Math.max(worst, Math.abs(s[i]! / reference - 1));
      expect(total[i]).toBe(Math.fround(s[i]! + u[i]!));
      want += total[i]!;
    }
    // a few float32 ulp (2^−23 ≈ 1.2e−7 is one ulp at the bottom of a binade; IEEE 754 binary32)
    expect(worst, `max relative error ${worst}`).toBeLessThan(4e-7);
    expect(Math.abs(sum - want) / want).toBeLessThan(1e-12);
  });

  it('expScaleAdd clamps the exponent to [−87, 88], finite and positive', () => {
    const arena = arenaFor(3);
    const [s, u, total] = [arena.float32(N), arena.float32(N), arena.float32(N)];
    s.fill(-1000, 0, N / 2).fill(1000, N / 2);
    arena.expScaleAdd(s, 1, u, total);
    expect(s[0]! / Math.exp(-87) - 1).toBeLessThan(4e-7);
    expect(s[N - 1]! / Math.exp(88) - 1).toBeLessThan(4e-7);
    expect(s.every((v) => Number.isFinite(v) && v > 0)).toBe(true);
  });

  it('productSum, amplitudeTimes and amplitudeGradient round the float64 results as the plain loops do', () => {
    const arena = arenaFor(4, 1);
    const [a, b, out, g] = [arena.float32(N), arena.float32(N), arena.float32(N), arena.float32(N)];
    const xi = arena.float64(N);
    const rand = lcg(5);
    for (let i = 0; i < N; i++) {
      a[i] = rand();
      b[i] = rand() - 0.5;
      g[i] = 2 * rand() - 1;
      xi[i] = rand() - 0.5;
    }
    let wantSum = 0;
    let wantHalfSquares = 0;
    const product = arena.productSum(a, b, out);
    for (let i = 0; i < N; i++) {
      expect(out[i]).toBe(Math.fround(a[i]! * b[i]!));
      wantSum += a[i]! * b[i]!;
    }
    expect(Math.abs(product - wantSum)).toBeLessThan(1e-12 * N);
    const halfSquares = arena.amplitudeTimes(a, xi, out);
    for (let i = 0; i < N; i++) {
      expect(out[i]).toBe(Math.fround(a[i]! * xi[i]!));
      wantHalfSquares += 0.5 * xi[i]! * xi[i]!;
    }
    expect(Math.abs(halfSquares - wantHalfSquares)).toBeLessThan(1e-12 * N);
    const before = g.slice();
    arena.amplitudeGradient(a, g, xi);
    for (let i = 0; i < N; i++) expect(g[i]).toBe(Math.fround(a[i]! * before[i]! + xi[i]!));
  });

  it('refuses arrays outside the arena, of other lengths or beyond its size', () => {
    const arena = arenaFor(2);
    const [a, b] = [arena.float32(N), arena.float32(N)];
    expect(() => arena.productSum(a, new Float32Array(N), b)).toThrow('views of this arena');
    expect(() => arena.productSum(a, b.subarray(0, N - 4), b)).toThrow('same length');
    expect(() => arena.productSum(a.subarray(0, 6), a.subarray(0, 6), a.subarray(0, 6))).toThrow(
      'multiple of 4',
    );
    // (the memory is whole 64 KiB WASM pages, so a little room is left after the two arrays, but not 256 KiB)
    expect(() => arena.float32(65536)).toThrow('do not fit');
  });
});
