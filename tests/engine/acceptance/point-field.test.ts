// @vitest-environment node
/**
 * Acceptance on a Gaussian-noise point field with log-normal diffuse emission (issue 3, "Acceptance"), on skies
 * from the team's committed generator (samples/sky-simulator.ts) with known truth.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { simulateSky, isolatedFluxError, FWHM_PER_SIGMA } from '../../../samples/sky-simulator';
import { psfFromFwhm } from '../../../server/engine/psf';
import { separate, type SeparationResult } from '../../../server/engine/separate';
import { figures, matchCatalogue, type Figures } from './match-catalogue';
import { medianFilterBackground } from './median-filter';

const WIDTH = 256;
const HEIGHT = 256;
const FWHM = 3;
const SIGMA = 1;
const SIGMA_PSF = FWHM / FWHM_PER_SIGMA; // Gaussian FWHM = 2√(2 ln 2) σ (handbook identity)
/** Single-source flux error σ/√ΣP²; fluxes are drawn between 3 σ_F and 300 σ_F (true SNR 3–300). */
const SIGMA_F = isolatedFluxError(psfFromFwhm(FWHM, FWHM, 0), SIGMA);

interface Run {
  result: SeparationResult;
  figures: Figures;
  diffuseError: number;
  medianFilterError: number;
}

const runs: Run[] = [];
let pooled: Figures;

function sky(seed: number) {
  return simulateSky({
    width: WIDTH,
    height: HEIGHT,
    seed,
    psf: { fwhmMajorPx: FWHM, fwhmMinorPx: FWHM, paDeg: 0 },
    diffuse: { level: 3 * SIGMA, logStd: 0.5, slope: 4 },
    sources: { count: 260, minFlux: 3 * SIGMA_F, maxFlux: 300 * SIGMA_F, minSeparationPx: 11 },
    noise: { kind: 'gaussian', sigma: SIGMA },
    wcs: { projection: 'TAN', raDeg: 150, decDeg: 30, pixelArcsec: 2 },
    unit: 'mJy/beam',
  });
}

beforeAll(async () => {
  const all: ReturnType<typeof matchCatalogue> = { matches: [], unmatched: [] };
  for (const seed of [101, 202]) {
    const s = sky(seed);
    const result = await separate(
      { width: WIDTH, height: HEIGHT, data: s.image, mask: s.mask },
      { psf: { fwhmMajor: FWHM, fwhmMinor: FWHM, pa: 0 } },
    );
    const truth = s.truth.sources.map((t) => ({ x: t.x, y: t.y, flux: t.flux, snr: t.snrTrue }));
    const m = matchCatalogue(truth, result.catalogue, 0.5 * FWHM);
    all.matches.push(...m.matches);
    all.unmatched.push(...m.unmatched);
    // Diffuse (as it appears in the image) against the truth, and a median-filter background of the same image.
    const median = medianFilterBackground(s.image, WIDTH, HEIGHT, s.mask, 7);
    let e1 = 0;
    let e2 = 0;
    for (let i = 0; i < WIDTH * HEIGHT; i++) {
      e1 += (result.diffuse[i]! - s.truth.diffuseConvolved[i]!) ** 2;
      e2 += (median[i]! - s.truth.diffuseConvolved[i]!) ** 2;
    }
    runs.push({
      result,
      figures: figures(m.matches, m.unmatched, SIGMA_PSF),
      diffuseError: Math.sqrt(e1 / (WIDTH * HEIGHT)),
      medianFilterError: Math.sqrt(e2 / (WIDTH * HEIGHT)),
    });
  }
  pooled = figures(all.matches, all.unmatched, SIGMA_PSF);
  console.log(
    'point-field acceptance:',
    JSON.stringify({
      pooled,
      evaluations: runs.map((r) => r.result.evaluations),
      seconds: runs.map((r) => Math.round(r.result.timings.total / 100) / 10),
      diffuse: runs.map((r) => [r.diffuseError, r.medianFilterError]),
      spectrum: runs.map((r) => [r.result.spectrum.amplitude, r.result.spectrum.slope]),
      sigma: runs.map((r) => r.result.sigma),
    }),
  );
}, 400_000);

const bin = (name: string) => pooled.completeness.find((b) => b.bin === name)!;

describe('separation of a point field on diffuse emission (Gaussian noise)', () => {
  it('finds ≥ 97% of sources with true SNR ≥ 7 and ≥ 70% at 5–7', () => {
    // Issue 3 acceptance; an ideal 5σ cut finds about 99.6% and 77% in these bins for a steep count law.
    const high = bin('>=7');
    const mid = bin('5-7');
    expect(high.total, 'enough sources with SNR ≥ 7 for the statistic').toBeGreaterThanOrEqual(60);
    expect(
      high.fraction,
      `SNR ≥ 7: found ${high.found} of ${high.total}, need ≥ 0.97`,
    ).toBeGreaterThanOrEqual(0.97);
    expect(mid.total).toBeGreaterThanOrEqual(30);
    expect(mid.fraction, `SNR 5–7: found ${mid.found} of ${mid.total}, need ≥ 0.70`).toBeGreaterThanOrEqual(
      0.7,
    );
  });

  it('has a median flux bias within ±3% for SNR ≥ 10', () => {
    expect(
      Math.abs(pooled.fluxBias),
      `median (flux/true − 1) = ${pooled.fluxBias}, tolerance 0.03`,
    ).toBeLessThan(0.03);
  });

  it('has honest flux errors: pull RMS between 0.8 and 1.3', () => {
    // pulls (flux − true)/flux_err for matched sources with SNR ≥ 5
    expect(pooled.pullCount).toBeGreaterThanOrEqual(60);
    expect(
      pooled.pullRms,
      `pull RMS ${pooled.pullRms} over ${pooled.pullCount} sources`,
    ).toBeGreaterThanOrEqual(0.8);
    expect(pooled.pullRms, `pull RMS ${pooled.pullRms} over ${pooled.pullCount} sources`).toBeLessThanOrEqual(
      1.3,
    );
  });

  it('measures positions within 1.3× the Fisher limit √2·σ_PSF/SNR per axis at SNR ≥ 10', () => {
    // Fisher information for the x position of a Gaussian source P = F/(2πσp²) exp(−r²/2σp²) in white noise σ:
    //   I_xx = (F²/σ²) ∫ (∂P/∂x / F)² = (F²/σ²) ∫ (x/σp²)² P₁² = (F²/σ²) · 1/(8π σp⁴)   (P₁ the unit-flux PSF,
    //   using ∫P₁² = 1/(4πσp²) and ⟨x²⟩ under P₁² = σp²/2). The flux error is σ_F² = σ²·4πσp² (noise-equivalent
    //   area 4πσp², from memory of the PSF-photometry literature), so SNR² = F²/(4πσp²σ²) and
    //   var(x) = 1/I_xx = 8πσp⁴σ²/F² = 2σp²/SNR²: the limit per axis is √2·σp/SNR (flux and position decouple at
    //   the centre by symmetry). The figure is the RMS over sources of (x − x_true)/limit.
    const p = pooled.positionRatio;
    expect(p.count).toBeGreaterThanOrEqual(30);
    expect(p.x, `x: RMS error/limit ${p.x} over ${p.count} sources, need ≤ 1.3`).toBeLessThanOrEqual(1.3);
    expect(p.y, `y: RMS error/limit ${p.y} over ${p.count} sources, need ≤ 1.3`).toBeLessThanOrEqual(1.3);
  });

  it('recovers the diffuse component closer to the truth than a median-filter background', () => {
    // A faint, smooth diffuse sky (3σ, e^±0.5) where a 15 × 15 median filter is at its best (measured: fit
    // 0.113 and 0.120 σ RMS, median filter 0.164 and 0.170); diffuse-field.test.ts checks the strong-diffuse case.
    for (const r of runs) {
      expect(
        r.diffuseError,
        `rms error: fit ${r.diffuseError}, median filter ${r.medianFilterError}`,
      ).toBeLessThan(r.medianFilterError);
    }
  });

  it('reports a sensible noise estimate and spectrum and converges', () => {
    for (const r of runs) {
      // The robust σ estimate is within 3% of the true σ = 1 (METHOD-NOTES: within 2% on bright diffuse).
      expect(Math.abs(r.result.sigma! / SIGMA - 1)).toBeLessThan(0.03);
      expect(r.result.spectrum.slope).toBeGreaterThanOrEqual(2);
      expect(r.result.converged).toBe(true);
      expect(r.result.trace.length).toBe(r.result.iterations);
    }
  });
});
