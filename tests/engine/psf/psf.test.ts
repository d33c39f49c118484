// @vitest-environment node
import { describe, expect, it } from 'vitest';
import stdlibErfc from '@stdlib/math-base-special-erfc';
import {
  erfc,
  FWHM_PER_SIGMA,
  normalInterval,
  psfBeamAreaPx,
  psfCovariance,
  psfFromBeam,
  psfFromFwhm,
  psfFromImage,
  psfFwhmPx,
  psfKernelOnGrid,
  psfStamp,
  psfStampHalfSize,
  type GaussianPsf,
  type Psf,
} from '../../../server/engine/psf';

function expectClose(actual: number, expected: number, tolerance: number, what: string): void {
  const diff = Math.abs(actual - expected);
  if (!(diff <= tolerance)) {
    throw new Error(
      `${what}: expected ${expected}, actual ${actual}, difference ${diff}, tolerance ${tolerance}`,
    );
  }
}

function sum(a: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i] as number;
  return s;
}

/** First and second moments of a stamp about its centre pixel. */
function stampMoments(values: Float64Array, half: number) {
  const size = 2 * half + 1;
  let s = 0;
  let sx = 0;
  let sy = 0;
  for (let j = -half; j <= half; j++)
    for (let i = -half; i <= half; i++) {
      const v = values[(j + half) * size + (i + half)] as number;
      s += v;
      sx += v * i;
      sy += v * j;
    }
  const mx = sx / s;
  const my = sy / s;
  let xx = 0;
  let xy = 0;
  let yy = 0;
  for (let j = -half; j <= half; j++)
    for (let i = -half; i <= half; i++) {
      const v = values[(j + half) * size + (i + half)] as number;
      xx += v * (i - mx) ** 2;
      xy += v * (i - mx) * (j - my);
      yy += v * (j - my) ** 2;
    }
  return { s, mx, my, xx: xx / s, xy: xy / s, yy: yy / s };
}

/** Brute-force pixel integral by an n × n midpoint rule of the Gaussian density written out from its covariance. */
function bruteForceStamp(psf: GaussianPsf, dx: number, dy: number, half: number, n: number): Float64Array {
  const sMaj = psf.fwhmMajorPx / FWHM_PER_SIGMA;
  const sMin = psf.fwhmMinorPx / FWHM_PER_SIGMA;
  const pa = (psf.paDeg * Math.PI) / 180;
  const ax = (psf.eastLeft ? -1 : 1) * Math.sin(pa);
  const ay = Math.cos(pa);
  const size = 2 * half + 1;
  const out = new Float64Array(size * size);
  const norm = 1 / (2 * Math.PI * sMaj * sMin);
  for (let j = -half; j <= half; j++)
    for (let i = -half; i <= half; i++) {
      let acc = 0;
      for (let b = 0; b < n; b++)
        for (let a = 0; a < n; a++) {
          const x = i - 0.5 + (a + 0.5) / n - dx;
          const y = j - 0.5 + (b + 0.5) / n - dy;
          const along = x * ax + y * ay; // coordinate along the major axis
          const across = x * ay - y * ax;
          acc += norm * Math.exp(-0.5 * ((along / sMaj) ** 2 + (across / sMin) ** 2));
        }
      out[(j + half) * size + (i + half)] = acc / (n * n);
    }
  return out;
}

const cases: { name: string; psf: GaussianPsf; dx: number; dy: number }[] = [
  { name: 'circular 3 px', psf: psfFromFwhm(3, 3, 0), dx: 0, dy: 0 },
  { name: 'elliptical 4×2 px, PA 30°, offset', psf: psfFromFwhm(4, 2, 30), dx: 0.3, dy: -0.45 },
  {
    name: 'narrow 1.2×0.9 px, PA 100°, east right',
    psf: psfFromFwhm(1.2, 0.9, 100, false),
    dx: -0.5,
    dy: 0.25,
  },
  { name: 'elongated 6×1.5 px, PA −60°', psf: psfFromFwhm(6, 1.5, -60), dx: 0.12, dy: 0.49 },
];

describe('normal integrals', () => {
  it('erfc matches @stdlib/math-base-special-erfc to 1e-13 relative over −6…26', () => {
    // Reference: @stdlib/math-base-special-erfc (an independent implementation of the same special function).
    let count = 0;
    for (let x = -6; x <= 26; x += 0.0737) {
      const expected = stdlibErfc(x);
      expectClose(erfc(x), expected, 1e-13 * expected + 1e-300, `erfc(${x})`);
      count++;
    }
    expect(count).toBeGreaterThan(400);
    expect(erfc(NaN)).toBeNaN();
    expect(erfc(40)).toBe(0);
    expect(erfc(-40)).toBe(2);
  });
  it('interval probabilities are accurate in the far tails', () => {
    // P(8 < Z < 9) = (erfc(8/√2) − erfc(9/√2))/2, reference values from @stdlib.
    const expected = 0.5 * (stdlibErfc(8 / Math.SQRT2) - stdlibErfc(9 / Math.SQRT2));
    expectClose(normalInterval(8, 9), expected, 1e-12 * expected, 'P(8<Z<9)');
    expectClose(normalInterval(-9, -8), expected, 1e-12 * expected, 'P(−9<Z<−8)');
    expectClose(normalInterval(-1, 1), 1 - stdlibErfc(1 / Math.SQRT2), 1e-15, 'P(−1<Z<1)');
  });
});

describe('Gaussian PSF stamps', () => {
  for (const c of cases) {
    it(`${c.name}: sums to one over a large stamp, centroid at the offset`, () => {
      const half = psfStampHalfSize(c.psf) + 4;
      const stamp = psfStamp(c.psf, c.dx, c.dy, half);
      expectClose(sum(stamp.values), 1, 1e-9, 'stamp sum');
      // Pixel moments equal the continuous ones (plus 1/12, Sheppard's correction) only when σ ≳ 0.6 px;
      // narrower PSFs are checked against the brute-force integral below instead.
      if (c.psf.fwhmMinorPx < 1.4) return;
      const m = stampMoments(stamp.values, half);
      expectClose(m.mx, c.dx, 1e-8, 'centroid x');
      expectClose(m.my, c.dy, 1e-8, 'centroid y');
    });

    it(`${c.name}: second moments give the requested FWHMs and PA`, () => {
      // Pixel integration convolves with the unit box, whose variance is 1/12 per axis (uniform distribution).
      if (c.psf.fwhmMinorPx < 1.4) return; // see above: Sheppard's correction needs σ ≳ 0.6 px
      const half = psfStampHalfSize(c.psf) + 4;
      const m = stampMoments(psfStamp(c.psf, c.dx, c.dy, half).values, half);
      const xx = m.xx - 1 / 12;
      const yy = m.yy - 1 / 12;
      const mean = (xx + yy) / 2;
      const halfDiff = Math.sqrt(((xx - yy) / 2) ** 2 + m.xy ** 2);
      // FWHM = 2√(2 ln 2) σ (Gaussian identity).
      const fwhmMajor = 2 * Math.sqrt(2 * Math.LN2) * Math.sqrt(mean + halfDiff);
      const fwhmMinor = 2 * Math.sqrt(2 * Math.LN2) * Math.sqrt(mean - halfDiff);
      expectClose(fwhmMajor, c.psf.fwhmMajorPx, 1e-6, 'major FWHM');
      expectClose(fwhmMinor, c.psf.fwhmMinorPx, 1e-6, 'minor FWHM');
      if (c.psf.fwhmMajorPx > c.psf.fwhmMinorPx) {
        // Major-axis eigenvector, then PA from (−sin PA, cos PA) (east left) or (sin PA, cos PA) (east right).
        const theta = 0.5 * Math.atan2(2 * m.xy, xx - yy); // angle of the major axis from +x
        const ax = Math.cos(theta);
        const ay = Math.sin(theta);
        const pa = (Math.atan2(c.psf.eastLeft ? -ax : ax, ay) * 180) / Math.PI;
        const diff = ((((pa - c.psf.paDeg) % 180) + 270) % 180) - 90; // axis direction is defined modulo 180°
        expectClose(diff, 0, 1e-6, 'position angle (deg, mod 180)');
      }
    });

    it(`${c.name}: equals a brute-force sub-sampled integral (Richardson-extrapolated midpoint rule)`, () => {
      const half = 5;
      const stamp = psfStamp(c.psf, c.dx, c.dy, half);
      // The n × n midpoint rule errs by c/n² + O(1/n⁴); combining n = 50 and n = 100 removes the 1/n² term
      // (Richardson extrapolation), leaving ~1e-8 of the peak.
      const coarse = bruteForceStamp(c.psf, c.dx, c.dy, half, 50);
      const fine = bruteForceStamp(c.psf, c.dx, c.dy, half, 100);
      const reference = fine.map((f, k) => (4 * f - (coarse[k] as number)) / 3);
      let peak = 0;
      for (const v of reference) peak = Math.max(peak, v);
      for (let k = 0; k < reference.length; k++) {
        expectClose(stamp.values[k] as number, reference[k] as number, 1e-7 * peak, `pixel ${k}`);
      }
    });

    it(`${c.name}: derivatives match central finite differences`, () => {
      const half = 4;
      const h = 1e-5;
      const stamp = psfStamp(c.psf, c.dx, c.dy, half);
      const px = psfStamp(c.psf, c.dx + h, c.dy, half).values;
      const mx = psfStamp(c.psf, c.dx - h, c.dy, half).values;
      const py = psfStamp(c.psf, c.dx, c.dy + h, half).values;
      const my = psfStamp(c.psf, c.dx, c.dy - h, half).values;
      for (let k = 0; k < stamp.values.length; k++) {
        const fdx = ((px[k] as number) - (mx[k] as number)) / (2 * h);
        const fdy = ((py[k] as number) - (my[k] as number)) / (2 * h);
        expectClose(stamp.dValuesDx[k] as number, fdx, 1e-6, `∂/∂dx pixel ${k}`);
        expectClose(stamp.dValuesDy[k] as number, fdy, 1e-6, `∂/∂dy pixel ${k}`);
      }
    });
  }

  it('rejects bad offsets and mismatched buffers', () => {
    const psf = psfFromFwhm(3, 3, 0);
    expect(() => psfStamp(psf, NaN, 0, 3)).toThrow('PSF stamp offset must be finite (got NaN, 0)');
    expect(() => psfStamp(psf, 0, 0, 3, psfStamp(psf, 0, 0, 2))).toThrow(
      'PSF stamp buffer has half-size 2 but 3 was asked for',
    );
    expect(() => psfStamp(psf, 0, 0, -1)).toThrow('PSF stamp half-size must be a whole number ≥ 0 (got -1)');
  });
});

describe('PSF orientation', () => {
  it('east left (CDELT1 < 0): PA 0° along +y, PA 90° along x, PA 45° along (−1, 1)', () => {
    const c0 = psfCovariance(psfFromFwhm(4, 2, 0));
    expect(c0.yy).toBeGreaterThan(c0.xx);
    expectClose(c0.xy, 0, 1e-12, 'PA 0 cross term');
    const c90 = psfCovariance(psfFromFwhm(4, 2, 90));
    expect(c90.xx).toBeGreaterThan(c90.yy);
    // Major axis along (−sin 45°, cos 45°) = (−1, 1)/√2 → negative x–y correlation.
    expect(psfCovariance(psfFromFwhm(4, 2, 45)).xy).toBeLessThan(0);
  });
  it('east right (CDELT1 > 0) mirrors the position angle', () => {
    expect(psfCovariance(psfFromFwhm(4, 2, 45, false)).xy).toBeGreaterThan(0);
    const beam = { majorDeg: 4 / 3600, minorDeg: 2 / 3600, paDeg: 45 };
    const left = psfFromBeam(beam, 1 / 3600, -1 / 3600);
    const right = psfFromBeam(beam, 1 / 3600, +1 / 3600);
    expect(left.eastLeft).toBe(true);
    expect(right.eastLeft).toBe(false);
    expectClose(psfCovariance(left).xy, -psfCovariance(right).xy, 1e-12, 'mirrored cross term');
    expect(psfCovariance(left).xy).toBeLessThan(0);
  });
});

describe('psfFromBeam and psfFromFwhm', () => {
  it('converts BMAJ/BMIN to pixels', () => {
    const psf = psfFromBeam({ majorDeg: 10 / 3600, minorDeg: 6 / 3600, paDeg: 20 }, 2 / 3600, -2 / 3600);
    expectClose(psf.fwhmMajorPx, 5, 1e-12, 'major px');
    expectClose(psf.fwhmMinorPx, 3, 1e-12, 'minor px');
    expect(psf.paDeg).toBe(20);
  });
  it('refuses bad beams with clear messages', () => {
    expect(() => psfFromBeam({ majorDeg: 0, minorDeg: 1, paDeg: 0 }, 1, -1)).toThrow(
      'Beam major axis BMAJ (degrees) must be a positive finite number (got 0)',
    );
    expect(() => psfFromBeam({ majorDeg: 1, minorDeg: 1, paDeg: 0 }, 1, 0)).toThrow(
      'CDELT1 must be a non-zero number (got 0)',
    );
    expect(() => psfFromFwhm(2, 3, 0)).toThrow(
      'PSF minor-axis FWHM (3 px) is larger than the major-axis FWHM (2 px)',
    );
    expect(() => psfFromFwhm(3, 2, NaN)).toThrow(
      'PSF position angle must be a finite number of degrees (got NaN)',
    );
    expect(() => psfFromFwhm(0.05, 0.05, 0)).toThrow('below 0.1 pixel');
  });
});

describe('beam area', () => {
  for (const [maj, min, pa] of [
    [3, 3, 0],
    [5, 2.5, 33],
    [8, 4, -70],
  ] as const) {
    it(`Ω = π θmaj θmin / (4 ln 2) equals the summed peak-normalised beam sampled at pixel centres (${maj}×${min})`, () => {
      // Published Gaussian beam area: Ω = ∫ exp(−4 ln 2 (a²/θmaj² + b²/θmin²)) = π θmaj θmin / (4 ln 2).
      // For FWHM ≥ 2 px the pixel-centre sum equals the integral to < 1e-8 (Poisson summation).
      const psf = psfFromFwhm(maj, min, pa);
      const c = psfCovariance(psf);
      const det = c.xx * c.yy - c.xy * c.xy;
      let total = 0;
      for (let y = -60; y <= 60; y++)
        for (let x = -60; x <= 60; x++) {
          total += Math.exp((-0.5 * (c.yy * x * x - 2 * c.xy * x * y + c.xx * y * y)) / det);
        }
      expectClose(psfBeamAreaPx(psf), total, 1e-7 * total, 'beam area (px)');
      expectClose(psfBeamAreaPx(psf), (Math.PI * maj * min) / (4 * Math.LN2), 1e-12, 'formula');
    });
  }
});

describe('psfFromImage', () => {
  function gaussianImage(
    w: number,
    h: number,
    cx: number,
    cy: number,
    fwhm: number,
    scale = 7,
  ): Float64Array {
    const s = fwhm / FWHM_PER_SIGMA;
    const out = new Float64Array(w * h);
    for (let y = 0; y < h; y++)
      for (let x = 0; x < w; x++)
        out[y * w + x] = scale * Math.exp((-0.5 * ((x - cx) ** 2 + (y - cy) ** 2)) / (s * s));
    return out;
  }
  it('normalises to unit sum and centres odd-sized images on their centroid', () => {
    const psf = psfFromImage(gaussianImage(15, 13, 7, 6, 3), 15, 13);
    expectClose(sum(psf.data), 1, 1e-12, 'sum');
    expect([psf.centreX, psf.centreY]).toEqual([7, 6]);
  });
  it('handles even sizes and off-middle centroids by rounding to the nearest pixel', () => {
    const psf = psfFromImage(gaussianImage(16, 16, 8.3, 6.8, 3), 16, 16);
    expect([psf.centreX, psf.centreY]).toEqual([8, 7]);
  });
  it('its FWHM estimate agrees with the Gaussian that made it', () => {
    const g = psfFromFwhm(3.5, 3.5, 0);
    const stamp = psfStamp(g, 0, 0, 12);
    const fwhm = psfFwhmPx(psfFromImage(stamp.values, 25, 25));
    expectClose(fwhm.major, 3.5, 1e-4, 'major');
    expectClose(fwhm.minor, 3.5, 1e-4, 'minor');
  });
  it('stamps of an image PSF: identity at zero offset, sum kept and centroid moved by sub-pixel shifts', () => {
    const g = psfFromFwhm(4, 3, 20);
    const image = psfFromImage(psfStamp(g, 0, 0, 12).values, 25, 25);
    const s0 = psfStamp(image, 0, 0, 12);
    for (let k = 0; k < s0.values.length; k++)
      expectClose(s0.values[k] as number, image.data[k] as number, 1e-15, `px ${k}`);
    const s = psfStamp(image, 0.3, -0.2, 12);
    expectClose(sum(s.values), 1, 1e-6, 'shifted sum');
    const m = stampMoments(s.values, 12);
    // Keys' kernel reproduces linear functions exactly, so the centroid moves by the shift (up to the clipped wings).
    expectClose(m.mx, 0.3, 1e-4, 'centroid x');
    expectClose(m.my, -0.2, 1e-4, 'centroid y');
    // and the shifted image stamp is close to the integrated Gaussian at that offset
    const direct = psfStamp(g, 0.3, -0.2, 12);
    // Cubic interpolation of a σ ≈ 1.5 px profile errs by about 1% of the peak (a regression bound, not a reference).
    let peak = 0;
    for (const v of direct.values) peak = Math.max(peak, v);
    for (let k = 0; k < s.values.length; k++) {
      expectClose(s.values[k] as number, direct.values[k] as number, 0.02 * peak, `px ${k}`);
    }
    // derivatives vs finite differences
    const h = 1e-6;
    const p = psfStamp(image, 0.3 + h, -0.2, 12).values;
    const q = psfStamp(image, 0.3 - h, -0.2, 12).values;
    for (let k = 0; k < s.values.length; k++) {
      expectClose(
        s.dValuesDx[k] as number,
        ((p[k] as number) - (q[k] as number)) / (2 * h),
        1e-7,
        `∂/∂dx px ${k}`,
      );
    }
  });
  it('refuses bad PSF images with clear messages', () => {
    const good = gaussianImage(9, 9, 4, 4, 2);
    const withNaN = good.slice();
    withNaN[3] = NaN;
    expect(() => psfFromImage(withNaN, 9, 9)).toThrow('PSF image has 1 blank or non-finite pixel(s)');
    expect(() => psfFromImage(new Float64Array(81), 9, 9)).toThrow('PSF image has no positive pixel');
    expect(() => psfFromImage(good, 9, 8)).toThrow('PSF image has 81 values but 9 × 8 = 72 were expected');
    expect(() => psfFromImage(new Float64Array(4), 2, 2)).toThrow('PSF image must be at least 3 × 3 pixels');
    expect(() => psfFromImage(gaussianImage(21, 21, 2, 10, 1.5), 21, 21)).toThrow(
      'PSF image is far off-centre',
    );
    expect(() => psfFromImage(gaussianImage(21, 21, 0, 10, 1.5), 21, 21)).toThrow(
      'PSF image peaks on its border',
    );
    const negative = good.map((v) => -v);
    negative[40] = 0.1;
    expect(() => psfFromImage(negative, 9, 9)).toThrow('PSF image sums to');
  });
});

describe('psfKernelOnGrid', () => {
  it('writes the same kernel into a given float32 grid, and refuses one of the wrong size', () => {
    const psf = psfFromFwhm(3.2, 2.1, 35);
    const want = psfKernelOnGrid(psf, 40, 24);
    const out = new Float32Array(40 * 24).fill(7); // overwritten, not added to
    expect(psfKernelOnGrid(psf, 40, 24, out)).toBe(out);
    let worst = 0;
    for (let i = 0; i < out.length; i++) worst = Math.max(worst, Math.abs(out[i]! - want[i]!));
    expect(worst).toBeLessThan(1e-7); // float32 rounding of values ≤ 1
    expect(() => psfKernelOnGrid(psf, 40, 24, new Float32Array(10))).toThrow(/10 entries given for 40 × 24/);
  });

  it('is centred at (0, 0) with wrap-around, symmetric and unit-sum', () => {
    const psf = psfFromFwhm(3, 3, 0);
    const w = 32;
    const h = 24;
    const k = psfKernelOnGrid(psf, w, h);
    expectClose(sum(k), 1, 1e-12, 'sum');
    let peakIndex = 0;
    for (let i = 0; i < k.length; i++) if ((k[i] as number) > (k[peakIndex] as number)) peakIndex = i;
    expect(peakIndex).toBe(0);
    expectClose(k[1] as number, k[w - 1] as number, 1e-15, 'x wrap symmetry');
    expectClose(k[w] as number, k[(h - 1) * w] as number, 1e-15, 'y wrap symmetry');
    // Matches the stamp at zero offset.
    const stamp = psfStamp(psf, 0, 0, 3);
    expectClose(k[2 * w + 1] as number, stamp.values[5 * 7 + 4] as number, 1e-12, 'offset (1, 2)');
    expectClose(
      k[(h - 2) * w + (w - 3)] as number,
      stamp.values[1 * 7 + 0] as number,
      1e-12,
      'offset (−3, −2)',
    );
  });
  it('folds light back on grids smaller than the PSF and handles image PSFs', () => {
    const folded = psfKernelOnGrid(psfFromFwhm(8, 8, 0), 5, 4);
    expectClose(sum(folded), 1, 1e-12, 'folded sum');
    const image = psfFromImage(psfStamp(psfFromFwhm(3, 2, 10), 0, 0, 6).values, 13, 13);
    const k = psfKernelOnGrid(image, 20, 20);
    expectClose(sum(k), 1, 1e-12, 'image kernel sum');
    expectClose(k[0] as number, image.data[6 * 13 + 6] as number, 1e-15, 'centre');
    expectClose(k[19] as number, image.data[6 * 13 + 5] as number, 1e-15, 'offset −1');
    expect(() => psfKernelOnGrid(image, 0, 3)).toThrow(
      'PSF kernel grid must have whole-number positive sides',
    );
  });
});

// Used only so the Psf union stays exercised by the type checker in this file.
const _unused: Psf | null = null;
void _unused;
