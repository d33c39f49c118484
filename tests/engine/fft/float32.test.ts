// @vitest-environment node
import { describe, expect, it } from 'vitest';
import {
  createConvolver,
  createHartley2d,
  createRealFft2d,
  goodFftSize,
  supportsFloat32,
} from '../../../server/engine/fft';
import {
  dot,
  maxAbs,
  maxAbsDifference,
  naiveConvolve,
  naiveDft2d,
  naiveHartley,
  randomArray,
} from './reference';

/**
 * float32 backend (PFFFT in WASM). Tolerances: float32 has ε = 2^−24 ≈ 6e−8; an FFT's error grows like
 * ε·log2(N)·‖f‖₂ (Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed., §24.1), so for values of
 * order 1 on N ≤ 4096 points we allow 2e−6·√N absolute on the spectrum and 2e−6 on round trips.
 */
const SIZES: [number, number][] = [
  [32, 16],
  [64, 48],
  [96, 16],
  [160, 32],
  [32, 80],
];

describe('createRealFft2d (float32)', () => {
  it.each(SIZES)('%i×%i matches the naive DFT within float32 rounding', (width, height) => {
    // A pedestal of 50 checks that the mean shift keeps the error at the level of the fluctuations.
    const input = randomArray(width * height, width + 17 * height, 50);
    const fft = createRealFft2d(width, height, { precision: 'float32' });
    expect(fft.implementation).toBe('pffft-wasm-float32');
    const re = new Float64Array(fft.spectrumWidth * height);
    const im = new Float64Array(fft.spectrumWidth * height);
    fft.forward(input, re, im);
    const reference = naiveDft2d(input, width, height);
    const tol = 2e-6 * Math.sqrt(width * height);
    for (let ky = 0; ky < height; ky++) {
      for (let kx = 0; kx < fft.spectrumWidth; kx++) {
        const i = ky * fft.spectrumWidth + kx;
        const diff = Math.hypot(
          re[i]! - reference.re[ky * width + kx]!,
          im[i]! - reference.im[ky * width + kx]!,
        );
        if (!(diff <= tol)) {
          throw new Error(
            `${width}×${height} at (${kx}, ${ky}): expected ${reference.re[ky * width + kx]}, got ${re[i]}, difference ${diff}, tolerance ${tol}`,
          );
        }
      }
    }
    const back = new Float64Array(width * height);
    fft.inverse(re, im, back);
    const { value, index } = maxAbsDifference(back, input);
    expect(value, `round trip at ${index}: ${input[index]} → ${back[index]}`).toBeLessThan(2e-6);
    fft.dispose();
  });

  it('keeps the input and the inverse input unchanged', () => {
    const input = randomArray(64 * 32, 3);
    const copy = input.slice();
    const fft = createRealFft2d(64, 32, { precision: 'float32' });
    const re = new Float64Array(33 * 32);
    const im = new Float64Array(33 * 32);
    fft.forward(input, re, im);
    const reCopy = re.slice();
    fft.inverse(re, im, new Float64Array(64 * 32));
    expect(input).toEqual(copy);
    expect(re).toEqual(reCopy);
  });

  it('takes every goodFftSize from 32 up, and supportsFloat32 says so', () => {
    for (let n = 32; n <= 5000; n += 7)
      expect(supportsFloat32(goodFftSize(n), goodFftSize(n + 3)), `${n}`).toBe(true);
    expect(supportsFloat32(30, 32)).toBe(false);
    expect(supportsFloat32(32, 24)).toBe(false);
  });

  it('rejects sizes PFFFT cannot take, with the fix in the message', () => {
    expect(() => createRealFft2d(96, 16, { precision: 'float32' })).not.toThrow();
    expect(() => createRealFft2d(40, 16, { precision: 'float32' })).toThrow(
      'float32 FFT width must be a multiple of 32 with no prime factor above 5, got 40 (use goodFftSize)',
    );
    expect(() => createRealFft2d(64, 56, { precision: 'float32' })).toThrow(
      'float32 FFT height must be a multiple of 16 with no prime factor above 5, got 56 (use goodFftSize)',
    );
    expect(() => createRealFft2d(64, 64, { precision: 'float16' as never })).toThrow(
      'FFT precision must be float64 or float32, got float16',
    );
  });

  it('Hartley stays its own inverse and the convolver its own adjoint pair, to float32 rounding', () => {
    const width = 64,
      height = 48,
      n = width * height;
    const x = randomArray(n, 8);
    const y = randomArray(n, 9);
    const h = createHartley2d(width, height, { precision: 'float32' });
    const hx = new Float64Array(n);
    const hhx = new Float64Array(n);
    h.transform(x, hx);
    h.transform(hx, hhx);
    expect(maxAbsDifference(hhx, x).value).toBeLessThan(2e-6);
    const conv = createConvolver(width, height, randomArray(n, 10), { precision: 'float32' });
    const ax = new Float64Array(n);
    const aty = new Float64Array(n);
    conv.apply(x, ax);
    conv.adjoint(y, aty);
    const left = dot(ax, y),
      right = dot(x, aty);
    expect(Math.abs(left - right) / Math.sqrt(dot(ax, ax) * dot(y, y)), `${left} vs ${right}`).toBeLessThan(
      1e-6,
    );
  });

  // The fused paths (types.ts FusedTransforms: Hartley and convolution without the float64 half spectrum) against
  // the direct sums from their definitions, on a grid with a bright pedestal (the mean is taken out before
  // rounding to float32 and put back in float64) and with a kernel that is not centro-symmetric (its adjoint
  // runs on the mirrored kernel's spectrum).
  it.each([
    [64, 48],
    [96, 32],
  ])('%i×%i fused Hartley and convolution match the direct sums', (width, height) => {
    const n = width * height;
    const fft = createRealFft2d(width, height, { precision: 'float32' });
    expect(fft.fused).toBeDefined();
    const x = randomArray(n, 21, 100);
    const h = createHartley2d(width, height, { fft });
    const hx = new Float64Array(n);
    h.transform(x, hx);
    const wantH = naiveHartley(x, width, height);
    expect(maxAbsDifference(hx, wantH).value / maxAbs(wantH)).toBeLessThan(2e-6);
    const kernel = randomArray(n, 22).map((v, i) => (i % 7 === 0 ? Math.abs(v) : 0));
    const conv = createConvolver(width, height, kernel, { fft });
    for (const adjoint of [false, true]) {
      const got = new Float64Array(n);
      if (adjoint) conv.adjoint(x, got);
      else conv.apply(x, got);
      const want = naiveConvolve(kernel, x, width, height, adjoint);
      expect(maxAbsDifference(got, want).value / maxAbs(want), adjoint ? 'adjoint' : 'apply').toBeLessThan(
        2e-6,
      );
      // in place, as the model calls it
      const inPlace = x.slice();
      if (adjoint) conv.adjoint(inPlace, inPlace);
      else conv.apply(inPlace, inPlace);
      expect(maxAbsDifference(inPlace, got).value).toBe(0);
    }
    conv.dispose();
    h.dispose();
    fft.dispose();
  });

  it('takes a float32 kernel on the fused path and refuses one on a float64 transform', () => {
    // the seeding round builds its K² kernel in a float32 grid of the model (staged-fit.ts)
    const width = 64,
      height = 48,
      n = width * height;
    const x = randomArray(n, 31, 10);
    const kernel = Float32Array.from(randomArray(n, 32), (v, i) => (i % 5 === 0 ? Math.abs(v) : 0));
    const fft = createRealFft2d(width, height, { precision: 'float32' });
    const conv = createConvolver(width, height, kernel, { fft });
    for (const adjoint of [false, true]) {
      const got = new Float64Array(n);
      if (adjoint) conv.adjoint(x, got);
      else conv.apply(x, got);
      const want = naiveConvolve(Float64Array.from(kernel), x, width, height, adjoint);
      expect(maxAbsDifference(got, want).value / maxAbs(want), adjoint ? 'adjoint' : 'apply').toBeLessThan(
        2e-6,
      );
    }
    conv.dispose();
    fft.dispose();
    expect(() => createConvolver(width, height, kernel, { precision: 'float64' })).toThrow(
      /float64 transform takes float64 grids only/,
    );
  });

  it('has no fused paths with a second thread, and refuses a kernel spectrum of another grid', () => {
    const threaded = createRealFft2d(512, 512, { precision: 'float32', threads: 2 });
    expect(threaded.fused).toBeUndefined();
    threaded.dispose();
    const a = createRealFft2d(64, 32, { precision: 'float32' });
    const b = createRealFft2d(96, 32, { precision: 'float32' });
    const k = b.fused!.kernel(new Float64Array(96 * 32));
    expect(() => a.fused!.convolve(new Float64Array(64 * 32), new Float64Array(64 * 32), k)).toThrow(
      'convolve needs a kernel spectrum made by this transform',
    );
    k.dispose();
    a.dispose();
    b.dispose();
  });
});
