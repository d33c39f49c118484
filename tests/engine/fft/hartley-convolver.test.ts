// @vitest-environment node
import { describe, expect, it } from 'vitest';
import {
  createConvolver,
  createHartley2d,
  createRealFft2d,
  kernelFromCentredStamp,
} from '../../../server/engine/fft';
import { dot, maxAbsDifference, naiveConvolve, naiveHartley, randomArray } from './reference';

const SIZES: [number, number][] = [
  [1, 1],
  [1, 6],
  [5, 1],
  [2, 3],
  [7, 5],
  [8, 8],
  [12, 9],
  [16, 20],
  [15, 14],
  [32, 11],
];

describe('createHartley2d (float64)', () => {
  it.each(SIZES)('%i×%i matches the cas definition', (width, height) => {
    const input = randomArray(width * height, 31 * width + height);
    const h = createHartley2d(width, height);
    const out = new Float64Array(width * height);
    h.transform(input, out);
    const want = naiveHartley(input, width, height);
    const { value, index } = maxAbsDifference(out, want);
    const tol = 1e-13 * Math.sqrt(width * height) + 1e-14;
    expect(
      value,
      `${width}×${height} at ${index}: expected ${want[index]}, got ${out[index]}, tol ${tol}`,
    ).toBeLessThan(tol);
  });

  it.each(SIZES)(
    '%i×%i is its own inverse and orthonormal (‖Hx‖ = ‖x‖, ⟨Hx, y⟩ = ⟨x, Hy⟩)',
    (width, height) => {
      const n = width * height;
      const x = randomArray(n, 5 + n);
      const y = randomArray(n, 6 + n, 0.3);
      const h = createHartley2d(width, height);
      const hx = new Float64Array(n);
      const hhx = new Float64Array(n);
      const hy = new Float64Array(n);
      h.transform(x, hx);
      h.transform(hx, hhx);
      h.transform(y, hy);
      const { value } = maxAbsDifference(hhx, x);
      expect(value, 'H(H(x)) − x').toBeLessThan(1e-14 * 8 * Math.log2(2 + n));
      expect(Math.abs(dot(hx, hx) - dot(x, x)) / dot(x, x), 'norm').toBeLessThan(1e-13);
      expect(Math.abs(dot(hx, y) - dot(x, hy)), 'symmetry').toBeLessThan(1e-12 * Math.sqrt(n));
    },
  );

  // (the objective transforms its gradient grid in place: fit/model.ts)
  it.each([
    ['float64', 12, 9],
    ['float32', 64, 32],
  ] as const)('%s %i×%i transforms in place as it does into another array', (precision, width, height) => {
    const input = randomArray(width * height, 99);
    const fft = createRealFft2d(width, height, { precision });
    const h = createHartley2d(width, height, { fft });
    const out = new Float64Array(width * height);
    h.transform(input, out);
    const inPlace = input.slice();
    h.transform(inPlace, inPlace);
    expect(maxAbsDifference(inPlace, out).value).toBe(0);
    fft.dispose();
  });
});

describe('createConvolver (float64)', () => {
  it.each(SIZES)('%i×%i apply and adjoint match the direct circular sums', (width, height) => {
    const n = width * height;
    const kernel = randomArray(n, 77 + n);
    const x = randomArray(n, 78 + n);
    const conv = createConvolver(width, height, kernel);
    const out = new Float64Array(n);
    for (const adjoint of [false, true]) {
      if (adjoint) conv.adjoint(x, out);
      else conv.apply(x, out);
      const want = naiveConvolve(kernel, x, width, height, adjoint);
      const { value, index } = maxAbsDifference(out, want);
      const tol = 1e-13 * n + 1e-14;
      expect(
        value,
        `${adjoint ? 'adjoint' : 'apply'} at ${index}: expected ${want[index]}, got ${out[index]}`,
      ).toBeLessThan(tol);
    }
  });

  it.each([
    [9, 7],
    [10, 8],
    [16, 5],
  ])('%i×%i centro-symmetric kernel (real spectrum path) matches the direct sum', (width, height) => {
    const n = width * height;
    const raw = randomArray(n, 90 + n);
    const kernel = new Float64Array(n);
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const mirror = ((height - y) % height) * width + ((width - x) % width);
        kernel[y * width + x] = raw[y * width + x]! + raw[mirror]!;
      }
    }
    const x = randomArray(n, 91 + n);
    const out = new Float64Array(n);
    const back = new Float64Array(n);
    const conv = createConvolver(width, height, kernel);
    conv.apply(x, out);
    conv.adjoint(x, back);
    const want = naiveConvolve(kernel, x, width, height, false);
    const { value, index } = maxAbsDifference(out, want);
    expect(value, `at ${index}: expected ${want[index]}, got ${out[index]}`).toBeLessThan(1e-13 * n);
    // For a symmetric kernel the adjoint is the same operator.
    expect(maxAbsDifference(back, out).value).toBeLessThan(1e-13 * n);
  });

  it('⟨Ax, y⟩ = ⟨x, Aᵀy⟩ for an asymmetric kernel (definition of the adjoint)', () => {
    const width = 48,
      height = 30,
      n = width * height;
    const kernel = randomArray(n, 1);
    const x = randomArray(n, 2);
    const y = randomArray(n, 3);
    const conv = createConvolver(width, height, kernel);
    const ax = new Float64Array(n);
    const aty = new Float64Array(n);
    conv.apply(x, ax);
    conv.adjoint(y, aty);
    const left = dot(ax, y),
      right = dot(x, aty);
    expect(Math.abs(left - right) / Math.abs(left), `${left} vs ${right}`).toBeLessThan(1e-12);
  });

  it('works in place (x and out the same array)', () => {
    const width = 10,
      height = 6,
      n = width * height;
    const kernel = randomArray(n, 4);
    const x = randomArray(n, 5);
    const conv = createConvolver(width, height, kernel);
    const separate = new Float64Array(n);
    conv.apply(x, separate);
    conv.apply(x, x);
    expect(maxAbsDifference(x, separate).value).toBeLessThan(1e-15);
  });

  it('a centred stamp shifts nothing: convolving a delta reproduces the stamp around the delta', () => {
    const width = 20,
      height = 16,
      n = width * height;
    const stamp = new Float64Array([0, 1, 0, 2, 5, 3, 0, 4, 0]); // 3×3, centre value 5 at (1, 1)
    const kernel = kernelFromCentredStamp(stamp, 3, 3, width, height);
    expect(kernel[0]).toBe(5);
    expect(kernel[width - 1]).toBe(2); // left neighbour wraps to x = width − 1
    expect(kernel[(height - 1) * width]).toBe(1); // neighbour above wraps to y = height − 1
    const delta = new Float64Array(n);
    delta[7 * width + 9] = 1;
    const out = new Float64Array(n);
    createConvolver(width, height, kernel).apply(delta, out);
    for (let j = 0; j < 3; j++) {
      for (let i = 0; i < 3; i++) {
        expect(out[(6 + j) * width + 8 + i]).toBeCloseTo(stamp[j * 3 + i]!, 12);
      }
    }
  });

  it('rejects bad kernels and stamps with exact messages', () => {
    expect(() => createConvolver(4, 4, new Float64Array(15))).toThrow(
      'convolution kernel must have 16 elements, got 15',
    );
    const bad = new Float64Array(16);
    bad[3] = Number.NaN;
    expect(() => createConvolver(4, 4, bad)).toThrow('convolution kernel has a non-finite value at pixel 3');
    expect(() => kernelFromCentredStamp(new Float64Array(25), 5, 5, 4, 8)).toThrow(
      'PSF stamp 5×5 is larger than the FFT grid 4×8',
    );
    expect(() => kernelFromCentredStamp(new Float64Array(4), 2, 3, 8, 8)).toThrow(
      'PSF stamp must have 6 elements, got 4',
    );
  });
});

describe('sharing one RealFft2d', () => {
  it('a Hartley transform and a convolver on one transform give the same results as on their own', async () => {
    const { createRealFft2d } = await import('../../../server/engine/fft');
    const width = 24,
      height = 18,
      n = width * height;
    const fft = createRealFft2d(width, height);
    const kernel = randomArray(n, 40);
    const x = randomArray(n, 41);
    const own = { h: new Float64Array(n), c: new Float64Array(n) };
    const shared = { h: new Float64Array(n), c: new Float64Array(n) };
    createHartley2d(width, height).transform(x, own.h);
    createConvolver(width, height, kernel).apply(x, own.c);
    const h = createHartley2d(width, height, { fft });
    const c = createConvolver(width, height, kernel, { fft });
    h.transform(x, shared.h);
    c.apply(x, shared.c);
    h.dispose();
    c.dispose();
    expect(shared).toEqual(own);
    // Disposing the users leaves the shared transform working.
    const re = new Float64Array(fft.spectrumWidth * height);
    expect(() => fft.forward(x, re, new Float64Array(re.length))).not.toThrow();
    expect(() => createHartley2d(width, height + 1, { fft })).toThrow('shared FFT is 24×18, expected 24×19');
  });
});
