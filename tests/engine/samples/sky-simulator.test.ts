// @vitest-environment node
import { describe, expect, it } from 'vitest';
import normalCdf from '@stdlib/stats-base-dists-normal-cdf';
import poissonPmf from '@stdlib/stats-base-dists-poisson-pmf';
import gammaQuantile from '@stdlib/stats-base-dists-gamma-quantile';
import { createRealFft2d } from '../../../server/engine/fft';
import { psfStamp, psfStampHalfSize } from '../../../server/engine/psf';
import { parseWcs } from '../../../server/engine/wcs/wcs';
import { cardNumber, cardString } from '../../../server/engine/io/header-card';
import { SeededRandom, logFactorial } from '../../../samples/random';
import {
  drawPowerLawFlux,
  isolatedFluxError,
  powerLawGaussianField,
  simulateSky,
  type SkySimulationOptions,
} from '../../../samples/sky-simulator';

function check(value: number, low: number, high: number, what: string): void {
  if (!(value >= low && value <= high)) throw new Error(`${what}: ${value} is outside [${low}, ${high}]`);
}

/** χ² quantile via the gamma distribution: χ²_k = Gamma(shape k/2, rate 1/2) (@stdlib). */
function chiSquareQuantile(p: number, dof: number): number {
  return gammaQuantile(p, dof / 2, 0.5);
}

const base: SkySimulationOptions = {
  width: 96,
  height: 80,
  seed: 7,
  psf: { fwhmMajorPx: 3.5, fwhmMinorPx: 2.5, paDeg: 30 },
  diffuse: { level: 1, logStd: 0.8, slope: 3 },
  sources: { count: 20, minFlux: 20, maxFlux: 2000 },
  noise: { kind: 'gaussian', sigma: 0.2 },
  wcs: { projection: 'TAN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
  unit: 'Jy/beam',
  writeBeam: true,
};

describe('SeededRandom', () => {
  it('is deterministic per seed and differs between seeds', () => {
    const a = new SeededRandom(1);
    const b = new SeededRandom(1);
    const c = new SeededRandom(2);
    const sa = Array.from({ length: 5 }, () => a.nextUint32());
    expect(Array.from({ length: 5 }, () => b.nextUint32())).toEqual(sa);
    expect(Array.from({ length: 5 }, () => c.nextUint32())).not.toEqual(sa);
    expect(() => new SeededRandom(1.5)).toThrow('Random seed must be a whole number (got 1.5)');
  });
  it('uniforms have mean ½ and variance 1/12', () => {
    const r = new SeededRandom(3);
    const n = 100000;
    let s = 0;
    let s2 = 0;
    for (let i = 0; i < n; i++) {
      const u = r.uniform();
      expect(u >= 0 && u < 1).toBe(true);
      s += u;
      s2 += u * u;
    }
    // 5σ bounds: σ(mean) = √(1/12/n), σ(variance) ≈ √(1/180/n)
    check(s / n, 0.5 - 5 * Math.sqrt(1 / 12 / n), 0.5 + 5 * Math.sqrt(1 / 12 / n), 'uniform mean');
    check(
      s2 / n - (s / n) ** 2,
      1 / 12 - 5 * Math.sqrt(1 / 180 / n),
      1 / 12 + 5 * Math.sqrt(1 / 180 / n),
      'uniform variance',
    );
  });
  it('normals pass a Kolmogorov–Smirnov test against @stdlib normal CDF', () => {
    const r = new SeededRandom(4);
    const n = 20000;
    const x = Float64Array.from({ length: n }, () => r.normal()).sort();
    let d = 0;
    for (let i = 0; i < n; i++) {
      const f = normalCdf(x[i] as number, 0, 1);
      d = Math.max(d, Math.abs(f - i / n), Math.abs(f - (i + 1) / n));
    }
    // Asymptotic KS critical value at 0.1%: 1.95/√n (standard table).
    check(d, 0, 1.95 / Math.sqrt(n), 'KS distance');
  });
  for (const lambda of [0.3, 4, 9.5, 10, 25, 300]) {
    it(`Poisson(${lambda}) passes a χ² test against @stdlib's Poisson pmf`, () => {
      const r = new SeededRandom(Math.round(lambda * 100));
      const n = 20000;
      const counts = new Map<number, number>();
      for (let i = 0; i < n; i++) {
        const k = r.poisson(lambda);
        expect(Number.isInteger(k) && k >= 0).toBe(true);
        counts.set(k, (counts.get(k) ?? 0) + 1);
      }
      // Bins of expected count ≥ 20, tails pooled.
      const lo = Math.max(0, Math.floor(lambda - 5 * Math.sqrt(lambda)));
      const hi = Math.ceil(lambda + 5 * Math.sqrt(lambda)) + 3;
      const bins: { expected: number; observed: number }[] = [];
      let below = 0;
      let belowObserved = 0;
      for (let k = 0; k < lo; k++) {
        below += n * poissonPmf(k, lambda);
        belowObserved += counts.get(k) ?? 0;
      }
      let pending = { expected: below, observed: belowObserved };
      for (let k = lo; k <= hi; k++) {
        pending.expected += n * poissonPmf(k, lambda);
        pending.observed += counts.get(k) ?? 0;
        if (pending.expected >= 20) {
          bins.push(pending);
          pending = { expected: 0, observed: 0 };
        }
      }
      let aboveObserved = 0;
      for (const [k, c] of counts) if (k > hi) aboveObserved += c;
      pending.observed += aboveObserved;
      pending.expected += n - bins.reduce((s, b) => s + b.expected, 0) - pending.expected;
      bins.push(pending);
      const chi2 = bins.reduce((s, b) => s + (b.observed - b.expected) ** 2 / Math.max(b.expected, 1e-9), 0);
      const limit = chiSquareQuantile(0.999, bins.length - 1);
      expect(bins.length).toBeGreaterThan(2);
      check(chi2, 0, limit, `χ² over ${bins.length} bins`);
    });
  }
  it('log-factorial agrees with direct sums across the table/Stirling boundary', () => {
    let direct = 0;
    for (let k = 1; k <= 300; k++) {
      direct += Math.log(k);
      check(Math.abs(logFactorial(k) - direct), 0, 1e-10 * direct, `ln ${k}!`);
    }
  });
});

describe('power-law Gaussian random field', () => {
  function measuredSlope(slope: number): number {
    // Radially averaged power in 12 log-spaced bins between 0.02 and 0.3 cycles/pixel, 4 fields of 256²,
    // then a least-squares line in log–log.
    const n = 256;
    const fft = createRealFft2d(n, n);
    const sw = fft.spectrumWidth;
    const edges = Array.from({ length: 13 }, (_, i) => 0.02 * Math.pow(0.3 / 0.02, i / 12));
    const sums = new Float64Array(12);
    const counts = new Float64Array(12);
    const re = new Float64Array(sw * n);
    const im = new Float64Array(sw * n);
    for (let seed = 0; seed < 4; seed++) {
      const field = powerLawGaussianField(n, n, slope, new SeededRandom(1000 + seed));
      fft.forward(field, re, im);
      for (let ky = 0; ky < n; ky++) {
        const fy = (ky <= n / 2 ? ky : ky - n) / n;
        for (let kx = 0; kx < sw; kx++) {
          const k = Math.hypot(kx / n, fy);
          const b = edges.findIndex((e, i) => i < 12 && k >= e && k < (edges[i + 1] as number));
          if (b < 0) continue;
          sums[b] =
            (sums[b] as number) + (re[ky * sw + kx] as number) ** 2 + (im[ky * sw + kx] as number) ** 2;
          counts[b] = (counts[b] as number) + 1;
        }
      }
    }
    fft.dispose();
    const xs: number[] = [];
    const ys: number[] = [];
    for (let b = 0; b < 12; b++) {
      if (!counts[b]) continue;
      xs.push(Math.log(Math.sqrt((edges[b] as number) * (edges[b + 1] as number))));
      ys.push(Math.log((sums[b] as number) / (counts[b] as number)));
    }
    const mx = xs.reduce((s, v) => s + v, 0) / xs.length;
    const my = ys.reduce((s, v) => s + v, 0) / ys.length;
    let sxy = 0;
    let sxx = 0;
    xs.forEach((x, i) => {
      sxy += (x - mx) * ((ys[i] as number) - my);
      sxx += (x - mx) ** 2;
    });
    return sxy / sxx;
  }
  for (const slope of [2.5, 3.5]) {
    it(`measured spectrum slope matches the requested −${slope} within ±0.15`, () => {
      // Tolerance: bin centres at geometric means of bins 1.25× wide bias the slope by < 0.05; scatter of the
      // binned powers over ≥ 100 modes per bin adds ~0.05. A regression bound, not a reference value.
      check(measuredSlope(slope), -slope - 0.15, -slope + 0.15, 'log–log slope');
    });
  }
  it('has zero mean and unit standard deviation', () => {
    const f = powerLawGaussianField(64, 48, 3, new SeededRandom(5));
    const mean = f.reduce((s, v) => s + v, 0) / f.length;
    const variance = f.reduce((s, v) => s + (v - mean) ** 2, 0) / f.length;
    check(Math.abs(mean), 0, 1e-12, 'mean');
    check(variance, 1 - 1e-12, 1 + 1e-12, 'variance');
  });
});

describe('source counts', () => {
  /** Maximum-likelihood slope a of dN/dS ∝ S^−a truncated to [min, max], by golden-section search. */
  function fitCountSlope(fluxes: number[], min: number, max: number): number {
    const sumLog = fluxes.reduce((s, v) => s + Math.log(v), 0);
    const logLikelihood = (a: number): number => {
      const e = 1 - a;
      return fluxes.length * Math.log(e / (Math.pow(max, e) - Math.pow(min, e))) - a * sumLog;
    };
    let lo = 1.2;
    let hi = 4;
    const g = (Math.sqrt(5) - 1) / 2;
    for (let i = 0; i < 80; i++) {
      const a = hi - g * (hi - lo);
      const b = lo + g * (hi - lo);
      if (logLikelihood(a) > logLikelihood(b)) hi = b;
      else lo = a;
    }
    return (lo + hi) / 2;
  }
  it('the flux sampler follows dN/dS ∝ S^−2.5 (maximum-likelihood slope within 4 standard errors)', () => {
    const r = new SeededRandom(21);
    const fluxes = Array.from({ length: 20000 }, () => drawPowerLawFlux(r, 1, 1000, 2.5));
    for (const f of fluxes) expect(f >= 1 && f <= 1000).toBe(true);
    // Standard error of the ML slope ≈ (a − 1)/√n (Pareto MLE asymptotics).
    const se = 1.5 / Math.sqrt(20000);
    check(fitCountSlope(fluxes, 1, 1000), 2.5 - 4 * se, 2.5 + 4 * se, 'ML count slope');
  });
  it('a simulated field carries that slope in its truth list', () => {
    const sky = simulateSky({
      ...base,
      width: 400,
      height: 400,
      sources: { count: 1500, minFlux: 5, maxFlux: 5000 },
      diffuse: { level: 0, logStd: 0, slope: 3 },
    });
    const fluxes = sky.truth.sources.map((s) => s.flux);
    expect(fluxes.length).toBe(1500);
    const se = 1.5 / Math.sqrt(1500);
    check(fitCountSlope(fluxes, 5, 5000), 2.5 - 4 * se, 2.5 + 4 * se, 'ML count slope of the field');
  });
});

describe('simulateSky', () => {
  it('is deterministic for the same options and changes with the seed', () => {
    const a = simulateSky(base);
    const b = simulateSky(base);
    const c = simulateSky({ ...base, seed: 8 });
    expect(Buffer.from(a.image.buffer).equals(Buffer.from(b.image.buffer))).toBe(true);
    expect(a.truth.sources).toEqual(b.truth.sources);
    expect(Buffer.from(a.image.buffer).equals(Buffer.from(c.image.buffer))).toBe(false);
  });
  it('Gaussian noise has the requested σ', () => {
    const sky = simulateSky({ ...base, width: 200, height: 200 });
    let s2 = 0;
    let s = 0;
    for (let i = 0; i < sky.image.length; i++) {
      const r = (sky.image[i] as number) - (sky.truth.model[i] as number);
      s += r;
      s2 += r * r;
    }
    const n = sky.image.length;
    const sigma = Math.sqrt(s2 / n - (s / n) ** 2);
    // σ of a sample σ ≈ σ/√(2n): 5 of those.
    check(sigma, 0.2 * (1 - 5 / Math.sqrt(2 * n)), 0.2 * (1 + 5 / Math.sqrt(2 * n)), 'noise σ');
  });
  it('Poisson images are integer counts with variance equal to the mean', () => {
    const sky = simulateSky({
      ...base,
      width: 200,
      height: 200,
      noise: { kind: 'poisson' },
      diffuse: { level: 3, logStd: 0.3, slope: 3 },
      sources: { count: 0, minFlux: 1, maxFlux: 1 },
    });
    let chi = 0;
    for (let i = 0; i < sky.image.length; i++) {
      const d = sky.image[i] as number;
      expect(Number.isInteger(d)).toBe(true);
      const m = sky.truth.model[i] as number;
      chi += (d - m) ** 2 / m;
    }
    const n = sky.image.length;
    // E[(d − λ)²/λ] = 1 with variance ≈ 2 + 1/λ; 5σ bound.
    check(chi / n, 1 - 5 * Math.sqrt(2.4 / n), 1 + 5 * Math.sqrt(2.4 / n), 'mean (d − λ)²/λ');
    expect(sky.truth.noiseSigma).toBeNull();
  });
  it('the convolved diffuse field equals a direct sum of the pixel-integrated PSF over the sky', () => {
    const sky = simulateSky(base);
    const h = psfStampHalfSize(sky.psf);
    const stamp = psfStamp(sky.psf, 0, 0, h);
    for (const [x, y] of [
      [40, 40],
      [55, 30],
      [30, 50],
    ] as const) {
      let direct = 0;
      for (let j = -h; j <= h; j++)
        for (let i = -h; i <= h; i++)
          direct +=
            (stamp.values[(j + h) * stamp.size + i + h] as number) *
            (sky.truth.diffuseSky[(y - j) * 96 + (x - i)] as number);
      const actual = sky.truth.diffuseConvolved[y * 96 + x] as number;
      check(Math.abs(actual - direct), 0, 1e-9 * direct, `convolved diffuse at ${x}, ${y}`);
    }
  });
  it('the diffuse sky is log-normal: ln(sky/level) has the requested standard deviation over a large padded field', () => {
    const sky = simulateSky({
      ...base,
      width: 256,
      height: 256,
      diffuse: { level: 2, logStd: 0.7, slope: 3 },
      sources: { count: 0, minFlux: 1, maxFlux: 1 },
    });
    for (let i = 0; i < sky.truth.diffuseSky.length; i += 97) {
      check(
        Math.abs(Math.log((sky.truth.diffuseSky[i] as number) / 2) - (sky.truth.logDiffuse[i] as number)),
        0,
        1e-12,
        'ln(sky/level) = φ',
      );
    }
    const phi = sky.truth.logDiffuse;
    const mean = phi.reduce((s, v) => s + v, 0) / phi.length;
    const std = Math.sqrt(phi.reduce((s, v) => s + (v - mean) ** 2, 0) / phi.length);
    // The image is a crop of the padded field, whose σ is 0.7 exactly; a crop's σ is lower (large modes missing).
    check(std, 0.35, 0.75, 'σ of φ over the crop');
  });
  it('writes a celestial WCS with CDELT1 < 0 and beam cards, and truth positions that agree with it', () => {
    const sky = simulateSky(base);
    const wcs = parseWcs(sky.header)!;
    expect(wcs.isCelestial).toBe(true);
    expect(cardNumber(sky.header, 'CDELT1')).toBeLessThan(0);
    expect(cardString(sky.header, 'BUNIT')).toBe('Jy/beam');
    check(cardNumber(sky.header, 'BMAJ')! * 3600, 3.5 * 1.5 - 1e-9, 3.5 * 1.5 + 1e-9, 'BMAJ (arcsec)');
    expect(cardNumber(sky.header, 'BPA')).toBe(30);
    for (const s of sky.truth.sources) {
      const [x, y] = wcs.worldToPixel(s.ra, s.dec);
      check(Math.abs(x - 1 - s.x) + Math.abs(y - 1 - s.y), 0, 1e-6, 'truth RA/Dec → pixel');
      expect(s.fluxDensity).toBeCloseTo(s.flux / sky.beamAreaPx, 12);
    }
  });
  it('the ideal SNR of a Gaussian-noise source is flux/σ_F with σ_F = σ/√ΣP²', () => {
    const sky = simulateSky({ ...base, width: 120, height: 120, blank: {} });
    const sigmaF = isolatedFluxError(sky.psf, 0.2);
    for (const s of sky.truth.sources) {
      if (s.x < 8 || s.y < 8 || s.x > 111 || s.y > 111) continue;
      // Sub-pixel position changes ΣP² by a few per cent for this 2.5-pixel minor axis.
      check(s.snrTrue / (s.flux / sigmaF), 0.95, 1.05, 'snrTrue ratio');
    }
  });
  it('blanks edges, rectangles and circles as NaN with a matching mask', () => {
    const sky = simulateSky({
      ...base,
      blank: {
        edgeWidthPx: 5,
        rectangles: [{ x0: 20, y0: 20, x1: 30, y1: 25 }],
        circles: [{ x: 60, y: 40, radius: 4 }],
      },
    });
    let blanked = 0;
    for (let i = 0; i < sky.image.length; i++) {
      expect(Number.isNaN(sky.image[i] as number)).toBe(sky.mask[i] === 0);
      if (!sky.mask[i]) blanked++;
    }
    const edge = 96 * 80 - 86 * 70;
    let circle = 0;
    for (let y = 0; y < 80; y++)
      for (let x = 0; x < 96; x++) if ((x - 60) ** 2 + (y - 40) ** 2 <= 16) circle++;
    expect(blanked).toBe(edge + 50 + circle);
  });
  it('refuses impossible requests with clear messages', () => {
    expect(() => simulateSky({ ...base, width: 8 })).toThrow(
      'Simulated image must be at least 16 × 16 whole pixels (got 8 × 80)',
    );
    expect(() => simulateSky({ ...base, sources: { count: 5, minFlux: 0, maxFlux: 1 } })).toThrow(
      '0 < minFlux ≤ maxFlux',
    );
    expect(() =>
      simulateSky({ ...base, sources: { count: 400, minFlux: 1, maxFlux: 2, minSeparationPx: 20 } }),
    ).toThrow('Cannot place 400 sources 20 px apart in 96 × 80 pixels');
  });
});
