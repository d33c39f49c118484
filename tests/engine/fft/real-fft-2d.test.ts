// @vitest-environment node
import { describe, expect, it } from 'vitest';
import { createRealFft2d, goodFftSize, isSmooth235 } from '../../../server/engine/fft';
import type { FftPrecision } from '../../../server/engine/fft';
import { maxAbs, maxAbsDifference, naiveDft2d, randomArray } from './reference';

// Sizes cover odd, even, prime (generic butterfly), non-power-of-two and size-1 axes.
const SIZES: [number, number][] = [
  [1, 1],
  [1, 7],
  [6, 1],
  [2, 2],
  [3, 5],
  [4, 4],
  [5, 9],
  [8, 6],
  [12, 10],
  [15, 16],
  [16, 15],
  [7, 11],
  [13, 4],
  [20, 27],
  [32, 24],
  [25, 30],
  [45, 8],
  [64, 2],
  [9, 49],
];

/**
 * Tolerance for float64 against the naive DFT: the naive sum itself carries ~N·ε·max|f| rounding, and the
 * FFT ~log2(N)·ε·‖f‖ (common practice: errors of both are far below 1e-12·N for |f| ≤ 1).
 */
function tolerance64(width: number, height: number): number {
  return 1e-13 * width * height + 1e-13;
}

function spectrumOf(width: number, height: number, input: Float64Array, precision: FftPrecision) {
  const fft = createRealFft2d(width, height, { precision });
  const re = new Float64Array(fft.spectrumWidth * height);
  const im = new Float64Array(fft.spectrumWidth * height);
  fft.forward(input, re, im);
  return { fft, re, im };
}

describe('createRealFft2d (float64) against a naive DFT', () => {
  it.each(SIZES)('%i×%i matches the direct sum', (width, height) => {
    const input = randomArray(width * height, width * 1000 + height);
    const before = input.slice();
    const { fft, re, im } = spectrumOf(width, height, input, 'float64');
    const reference = naiveDft2d(input, width, height);
    const tol = tolerance64(width, height);
    expect(fft.spectrumWidth).toBe(Math.floor(width / 2) + 1);
    for (let ky = 0; ky < height; ky++) {
      for (let kx = 0; kx < fft.spectrumWidth; kx++) {
        const got = re[ky * fft.spectrumWidth + kx]!,
          gotIm = im[ky * fft.spectrumWidth + kx]!;
        const want = reference.re[ky * width + kx]!,
          wantIm = reference.im[ky * width + kx]!;
        const diff = Math.hypot(got - want, gotIm - wantIm);
        if (!(diff <= tol)) {
          throw new Error(
            `${width}×${height} at (kx=${kx}, ky=${ky}): expected ${want}+${wantIm}i, got ${got}+${gotIm}i, ` +
              `difference ${diff}, tolerance ${tol}`,
          );
        }
      }
    }
    expect(input).toEqual(before);
  });

  it.each(SIZES)('%i×%i round trip inverse(forward(x)) = x', (width, height) => {
    const input = randomArray(width * height, 7 + width * height);
    const { fft, re, im } = spectrumOf(width, height, input, 'float64');
    const reCopy = re.slice();
    const back = new Float64Array(width * height);
    fft.inverse(re, im, back);
    const { value, index } = maxAbsDifference(back, input);
    // Round trip: a few ε·log2 N relative to max|x| = 1.
    expect(value, `max error ${value} at ${index}, tolerance 1e-14`).toBeLessThan(
      1e-14 * Math.log2(2 + width * height) * 4,
    );
    expect(re).toEqual(reCopy);
  });

  it.each([
    [16, 12],
    [15, 9],
    [64, 40],
  ])('%i×%i inverseInPlace gives the same image as inverse', (width, height) => {
    const input = randomArray(width * height, 5 * width + height);
    const { fft, re, im } = spectrumOf(width, height, input, 'float64');
    const viaCopy = new Float64Array(width * height);
    const inPlace = new Float64Array(width * height);
    fft.inverse(re, im, viaCopy);
    fft.inverseInPlace(re, im, inPlace);
    expect(maxAbsDifference(inPlace, viaCopy).value).toBe(0);
  });

  it('FFT of a delta at (x0, y0) is the pure phase exp(−2πi(kx x0/W + ky y0/H)) (definition of the DFT)', () => {
    const width = 24,
      height = 20,
      x0 = 5,
      y0 = 3;
    const input = new Float64Array(width * height);
    input[y0 * width + x0] = 1;
    const { fft, re, im } = spectrumOf(width, height, input, 'float64');
    for (let ky = 0; ky < height; ky++) {
      for (let kx = 0; kx < fft.spectrumWidth; kx++) {
        const angle = -2 * Math.PI * ((kx * x0) / width + (ky * y0) / height);
        const i = ky * fft.spectrumWidth + kx;
        expect(Math.abs(re[i]! - Math.cos(angle)), `re at ${kx},${ky}`).toBeLessThan(1e-14);
        expect(Math.abs(im[i]! - Math.sin(angle)), `im at ${kx},${ky}`).toBeLessThan(1e-14);
      }
    }
  });

  it('Parseval: Σ|f|² = (1/N) Σ over the full spectrum |F|², the missing half by Hermitian symmetry', () => {
    for (const [width, height] of [
      [30, 18],
      [31, 17],
      [64, 48],
    ] as const) {
      const input = randomArray(width * height, 99 + width);
      const { fft, re, im } = spectrumOf(width, height, input, 'float64');
      let energy = 0;
      for (const v of input) energy += v * v;
      let spectral = 0;
      for (let ky = 0; ky < height; ky++) {
        for (let kx = 0; kx < fft.spectrumWidth; kx++) {
          const p = re[ky * fft.spectrumWidth + kx]! ** 2 + im[ky * fft.spectrumWidth + kx]! ** 2;
          // Columns kx with a partner width − kx outside the stored half count twice.
          const twice = kx > 0 && width - kx >= fft.spectrumWidth;
          spectral += twice ? 2 * p : p;
        }
      }
      spectral /= width * height;
      expect(
        Math.abs(spectral - energy) / energy,
        `${width}×${height}: ${spectral} vs ${energy}`,
      ).toBeLessThan(1e-13);
    }
  });

  it('a constant image has all its power at k = 0 (F(0,0) = N·c)', () => {
    const width = 40,
      height = 36;
    const input = new Float64Array(width * height).fill(2.5);
    const { re, im } = spectrumOf(width, height, input, 'float64');
    expect(re[0]).toBeCloseTo(2.5 * width * height, 9);
    re[0] = 0;
    expect(maxAbs(re)).toBeLessThan(1e-11);
    expect(maxAbs(im)).toBeLessThan(1e-11);
  });

  it('rejects invalid sizes and wrong array lengths with exact messages', () => {
    expect(() => createRealFft2d(0, 4)).toThrow('FFT width must be a positive integer, got 0');
    expect(() => createRealFft2d(4, 2.5)).toThrow('FFT height must be a positive integer, got 2.5');
    expect(() => createRealFft2d(Number.NaN, 4)).toThrow('FFT width must be a positive integer, got NaN');
    expect(() => createRealFft2d(65536, 65536)).toThrow(
      'FFT grid 65536×65536 is too large: at most 268435456 pixels',
    );
    const fft = createRealFft2d(8, 4);
    expect(() => fft.forward(new Float64Array(31), new Float64Array(20), new Float64Array(20))).toThrow(
      'FFT input must have 32 elements, got 31',
    );
    expect(() => fft.forward(new Float64Array(32), new Float64Array(19), new Float64Array(20))).toThrow(
      'FFT output (real part) must have 20 elements, got 19',
    );
    expect(() => fft.inverse(new Float64Array(20), new Float64Array(20), new Float64Array(33))).toThrow(
      'inverse FFT output must have 32 elements, got 33',
    );
  });
});

describe('goodFftSize', () => {
  it('returns the smallest 2,3,5-smooth size ≥ n, a multiple of 32 from 32 up (checked by brute force)', () => {
    for (let n = 1; n <= 2100; n++) {
      const m = goodFftSize(n);
      expect(m).toBeGreaterThanOrEqual(n);
      expect(isSmooth235(m)).toBe(true);
      if (m >= 32) expect(m % 32).toBe(0);
      for (let k = n; k < m; k++)
        expect(isSmooth235(k) && (k < 32 || k % 32 === 0), `${k} < ${m}`).toBe(false);
    }
    expect([goodFftSize(1000), goodFftSize(1025), goodFftSize(1281), goodFftSize(7)]).toEqual([
      1024, 1152, 1440, 8,
    ]);
  });

  it('rejects sizes below 1', () => {
    expect(() => goodFftSize(0)).toThrow('FFT size must be at least 1, got 0');
  });
});
