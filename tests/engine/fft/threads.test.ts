// @vitest-environment node
import { describe, expect, it } from 'vitest';
import { createRealFft2d, type FftPrecision, type RealFft2d } from '../../../server/engine/fft';
import { maxAbsDifference, randomArray } from './reference';

/** The worker starts in the background: wait for it so the two-thread path is the one tested. */
async function untilWorkerReady(fft: RealFft2d): Promise<boolean> {
  return fft.whenReady();
}
describe('two-thread transforms (persistent worker, shared memory)', () => {
  it.each<[FftPrecision, number, number]>([
    ['float32', 512, 512],
    ['float32', 640, 480],
    ['float64', 512, 512],
    ['float64', 750, 360],
  ])('%s %i×%i gives bit-identical results to one thread', async (precision, width, height) => {
    const one = createRealFft2d(width, height, { precision, threads: 1 });
    const two = createRealFft2d(width, height, { precision, threads: 2 });
    try {
      expect(await untilWorkerReady(two), 'worker became ready').toBe(true);
      expect(two.implementation).toMatch(/2-threads$/);
      const input = randomArray(width * height, width * height, 3);
      const size = one.spectrumWidth * height;
      const [re1, im1, re2, im2] = [0, 1, 2, 3].map(() => new Float64Array(size)) as [
        Float64Array,
        Float64Array,
        Float64Array,
        Float64Array,
      ];
      one.forward(input, re1, im1);
      two.forward(input, re2, im2);
      expect(maxAbsDifference(re1, re2).value).toBe(0);
      expect(maxAbsDifference(im1, im2).value).toBe(0);
      const back1 = new Float64Array(width * height);
      const back2 = new Float64Array(width * height);
      one.inverse(re1, im1, back1);
      two.inverse(re2, im2, back2);
      expect(maxAbsDifference(back1, back2).value).toBe(0);
      // Round trip within the precision's rounding (float32: ε·log2 N on values ≤ 4).
      expect(maxAbsDifference(back2, input).value).toBeLessThan(precision === 'float32' ? 1e-5 : 1e-13);
      // A second call reuses the same worker and buffers.
      two.forward(back2, re2, im2);
      one.forward(back2, re1, im1);
      expect(maxAbsDifference(re1, re2).value).toBe(0);
    } finally {
      one.dispose();
      two.dispose();
    }
  });

  it('stays on one thread below 512² pixels', async () => {
    const small = createRealFft2d(256, 256, { precision: 'float32', threads: 2 });
    expect(small.implementation).toBe('pffft-wasm-float32');
    expect(await small.whenReady()).toBe(true);
    small.dispose();
  });

  it('rejects a thread count other than 1 or 2', () => {
    expect(() => createRealFft2d(64, 64, { threads: 3 as never })).toThrow(
      'FFT threads must be 1 or 2, got 3',
    );
  });
});
