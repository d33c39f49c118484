// @vitest-environment node
import { describe, expect, it } from 'vitest';
import quantile from '@stdlib/stats-base-dists-normal-quantile';
import { estimateNoiseSigma, MAD_TO_SIGMA } from '../../../server/engine/noise/robust-sigma';
import { medianInPlace } from '../../../server/engine/noise/median';

/** Seeded uniform deviates in (0, 1) (LCG, Numerical Recipes constants). */
function uniforms(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return (s + 0.5) / 2 ** 32;
  };
}

/** White normal noise by inversion of @stdlib's normal quantile function. */
function normalNoise(n: number, sigma: number, seed: number): Float64Array {
  const u = uniforms(seed);
  return Float64Array.from({ length: n }, () => quantile(u(), 0, sigma));
}

describe('estimateNoiseSigma', () => {
  it('uses the normal MAD consistency constant 1/Φ⁻¹(3/4)', () => {
    // Reference: @stdlib normal quantile.
    expect(Math.abs(MAD_TO_SIGMA - 1 / quantile(0.75, 0, 1))).toBeLessThan(1e-12);
  });

  it('recovers σ of pure white noise within 2%', () => {
    const w = 256;
    const h = 200;
    for (const [sigma, seed] of [
      [1, 1],
      [0.003, 2],
      [42, 3],
    ] as const) {
      const est = estimateNoiseSigma(normalNoise(w * h, sigma, seed), w, h).sigma;
      // Tolerance: the MAD of ~5·10⁴ correlated Laplacian values scatters by well under 1%; 2% leaves room.
      expect(Math.abs(est / sigma - 1), `σ true ${sigma}, estimated ${est}, tolerance 2%`).toBeLessThan(0.02);
    }
  });

  it('stays within 3% on a bright diffuse field with compact sources', () => {
    const w = 256;
    const h = 256;
    const sigma = 1;
    const data = normalNoise(w * h, sigma, 11);
    // Diffuse emission 50–250 σ bright with structure 8–30 pixels wide (a few beams of 3 px), plus 40 compact
    // sources up to 200 σ. The Laplacian leaves a signal of about a/(2r²) at a blob's peak, so structure that is
    // both brighter and narrower than this reads high (the estimate is meant for diffuse emission, not for knots).
    const u = uniforms(5);
    const blobs = Array.from({ length: 60 }, () => ({
      x: u() * w,
      y: u() * h,
      r: 8 + 22 * u(),
      a: 20 + 60 * u(),
    }));
    const points = Array.from({ length: 40 }, () => ({ x: u() * w, y: u() * h, a: 10 + 200 * u() }));
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        let v = 50;
        for (const b of blobs) v += b.a * Math.exp(-((x - b.x) ** 2 + (y - b.y) ** 2) / (2 * b.r * b.r));
        for (const p of points) v += p.a * Math.exp(-((x - p.x) ** 2 + (y - p.y) ** 2) / (2 * 1.5 * 1.5));
        data[y * w + x] = data[y * w + x]! + v;
      }
    }
    const est = estimateNoiseSigma(data, w, h).sigma;
    expect(Math.abs(est / sigma - 1), `σ true ${sigma}, estimated ${est}, tolerance 3%`).toBeLessThan(0.03);
  });

  it('leaves out masked and non-finite pixels', () => {
    const w = 128;
    const h = 128;
    const data = normalNoise(w * h, 2, 21);
    const valid = new Uint8Array(w * h).fill(1);
    for (let i = 0; i < w * 40; i++) {
      data[i] = 1e6 * (i % 7); // garbage under the mask
      valid[i] = 0;
    }
    data[w * 100 + 50] = NaN;
    const est = estimateNoiseSigma(data, w, h, valid);
    expect(Math.abs(est.sigma / 2 - 1), `σ 2, estimated ${est.sigma}`).toBeLessThan(0.03);
    expect(est.samples).toBeLessThan((w - 2) * (h - 41));
  });

  it('refuses inputs it cannot estimate from, with clear messages', () => {
    expect(() => estimateNoiseSigma(new Float64Array(4), 2, 2)).toThrow(
      'noise estimate needs an image of at least 3×3 pixels (got 2×2)',
    );
    expect(() => estimateNoiseSigma(new Float64Array(100).fill(3), 10, 10)).toThrow(
      'noise estimate: the image has no pixel-to-pixel variation (σ = 0); give the noise σ explicitly',
    );
    expect(() => estimateNoiseSigma(new Float64Array(10), 5, 5)).toThrow(
      'data has 10 values, expected 5×5 = 25',
    );
  });
});

describe('medianInPlace', () => {
  it('matches a sort-based median for odd and even counts', () => {
    const u = uniforms(3);
    for (const n of [1, 2, 3, 10, 101, 1000]) {
      const a = Float64Array.from({ length: n }, () => Math.floor(u() * 50));
      const sorted = Array.from(a).sort((p, q) => p - q);
      const ref = n % 2 ? sorted[(n - 1) / 2]! : (sorted[n / 2 - 1]! + sorted[n / 2]!) / 2;
      expect(medianInPlace(a), `n = ${n}`).toBe(ref);
    }
  });
});
