// @vitest-environment node
import { describe, expect, it } from 'vitest';
import logpdf from '@stdlib/stats-base-dists-invgamma-logpdf';
import { SeparationModel } from '../../../server/engine/fit/model';
import { modeWavenumbers, powerLawSpectrum } from '../../../server/engine/fit/spectrum';
import { psfFromFwhm, psfKernelOnGrid } from '../../../server/engine/psf';
import { lcg } from '../../support/lcg';

function makeModel(kind: 'gaussian' | 'poisson'): SeparationModel {
  const width = 20;
  const height = 14;
  const pw = 30;
  const ph = 24;
  const rand = lcg(kind === 'gaussian' ? 1 : 2);
  const data = Float64Array.from({ length: width * height }, () =>
    kind === 'gaussian' ? 3 + rand() : Math.floor(rand() * 8),
  );
  const valid = new Uint8Array(width * height).fill(1);
  for (let i = 0; i < 12; i++) valid[i * 7] = 0;
  const inverseVariance = Float64Array.from({ length: width * height }, () => 0.5 + rand());
  const model = new SeparationModel({
    width,
    height,
    paddedWidth: pw,
    paddedHeight: ph,
    data,
    valid,
    noise: kind === 'gaussian' ? { kind, inverseVariance } : { kind },
    kernel: psfKernelOnGrid(psfFromFwhm(3, 2, 30), pw, ph),
    alpha: 1.5,
    q: 0.2,
  });
  model.setSpectrum(
    powerLawSpectrum(
      modeWavenumbers(pw, ph),
      { amplitude: 0.01, slope: 3, turnover: 1 / 30 },
      null,
      new Float64Array(pw * ph),
    ),
  );
  return model;
}

describe('SeparationModel scratch grids', () => {
  it('gives the same objective after its grids were lent out and filled with junk', () => {
    // scratchGrids lends the model's four padded workspaces (seeding, the start); u must be 0 in the padding
    // afterwards, or the next evaluation would convolve the junk into the model
    const model = makeModel('gaussian');
    const rand = lcg(17);
    const xi = Float64Array.from({ length: model.n }, () => rand() - 0.5);
    const tau = Float64Array.from({ length: model.m }, () => Math.log(0.1 + 2 * rand()));
    const blocks = { diffuse: true, compact: true };
    const [before] = model.evaluate(xi, 0.9, tau, blocks, null, null);
    for (const grid of model.scratchGrids()) grid.fill(123.5);
    const [after] = model.evaluate(xi, 0.9, tau, blocks, null, null);
    expect(after).toBe(before);
    for (const grid of model.scratchGrids()) grid.fill(-7);
    model.fixCompact(tau, Int32Array.from([3, 4, 5]));
    const [held] = model.evaluate(xi, 0.9, tau, blocks, null, null);
    expect(held).toBeCloseTo(before, 9);
    expect(() => model.scratchGrids()).toThrow(/no scratch grids while compact pixels are held/);
  });
});

describe('SeparationModel gradient', () => {
  for (const kind of ['gaussian', 'poisson'] as const) {
    it(`matches central finite differences (${kind} likelihood)`, () => {
      const model = makeModel(kind);
      const rand = lcg(9);
      const xi = Float64Array.from({ length: model.n }, () => rand() - 0.5);
      const tau = Float64Array.from({ length: model.m }, () => Math.log(0.1 + 2 * rand()));
      const mu = Math.log(2.5);
      const blocks = { diffuse: true, compact: true };
      const gXi = new Float64Array(model.n);
      const gTau = new Float64Array(model.m);
      const [, gMu] = model.evaluate(xi, mu, tau, blocks, gXi, gTau);
      const h = 1e-5;
      const f = (): number => model.evaluate(xi, mu, tau, blocks, null, null)[0];
      const check = (name: string, arr: Float64Array, grad: Float64Array, indices: number[]): void => {
        for (const i of indices) {
          const keep = arr[i]!;
          arr[i] = keep + h;
          const fp = f();
          arr[i] = keep - h;
          const fm = f();
          arr[i] = keep;
          const fd = (fp - fm) / (2 * h);
          const tol = 1e-5 * Math.max(1, Math.abs(fd));
          expect(
            Math.abs(grad[i]! - fd),
            `${name}[${i}]: analytic ${grad[i]}, finite difference ${fd}, tol ${tol}`,
          ).toBeLessThan(tol);
        }
      };
      check('xi', xi, gXi, [0, 1, 5, 37, 200, model.n - 1]);
      check('tau', tau, gTau, [0, 3, 7, 50, 141, model.m - 1]);
      const fp = model.evaluate(xi, mu + h, tau, blocks, null, null)[0];
      const fm = model.evaluate(xi, mu - h, tau, blocks, null, null)[0];
      expect(Math.abs(gMu - (fp - fm) / (2 * h))).toBeLessThan(1e-5 * Math.max(1, Math.abs(gMu)));
      model.dispose();
    });
  }

  it('gives the same objective and gradient with only some compact pixels free (fixCompact)', () => {
    const model = makeModel('gaussian');
    const rand = lcg(11);
    const xi = Float64Array.from({ length: model.n }, () => rand() - 0.5);
    const tau = Float64Array.from({ length: model.m }, () => Math.log(0.1 + 2 * rand()));
    const blocks = { diffuse: true, compact: true };
    const gXiAll = new Float64Array(model.n);
    const gTauAll = new Float64Array(model.m);
    const [fAll] = model.evaluate(xi, 0.7, tau, blocks, gXiAll, gTauAll);
    const active = Int32Array.from([0, 3, 21, 22, 150, model.m - 1]);
    model.fixCompact(tau, active);
    // move the free pixels: the fixed ones keep their values, so a full evaluation at the same τ must agree
    for (const i of active) tau[i] = tau[i]! + 0.3;
    const gXi = new Float64Array(model.n);
    const gTau = new Float64Array(model.m);
    const [fFixed, gMuFixed] = model.evaluate(xi, 0.7, tau, blocks, gXi, gTau);
    model.fixCompact(tau, null);
    const [fFull, gMuFull] = model.evaluate(xi, 0.7, tau, blocks, gXiAll, gTauAll);
    expect(fFixed).not.toBe(fAll);
    expect(Math.abs(fFixed - fFull)).toBeLessThan(1e-9 * Math.abs(fFull));
    expect(Math.abs(gMuFixed - gMuFull)).toBeLessThan(1e-9 * Math.max(1, Math.abs(gMuFull)));
    for (const i of active) expect(Math.abs(gTau[i]! - gTauAll[i]!)).toBeLessThan(1e-9);
    for (let i = 0; i < model.n; i += 17) expect(Math.abs(gXi[i]! - gXiAll[i]!)).toBeLessThan(1e-9);
    model.dispose();
  });

  it('uses the inverse-gamma prior in τ = log u with its Jacobian: −log p(τ) = ατ + q e^(−τ) + const', () => {
    // Reference: @stdlib invgamma logpdf(u; α, β = q) and p(τ) = p(u)·|du/dτ| = p(u)·u.
    // With every pixel masked the likelihood vanishes, so objective differences are prior differences.
    const model = makeModel('gaussian');
    model.setup.valid.fill(0);
    const { alpha, q } = model.setup;
    const xi = new Float64Array(model.n);
    const tau = new Float64Array(model.m).fill(Math.log(0.3));
    const blocks = { diffuse: true, compact: true };
    for (const [t1, t2] of [
      [Math.log(0.05), Math.log(3)],
      [Math.log(0.7), Math.log(20)],
      [-4, 1],
    ] as const) {
      tau[5] = t1;
      const f1 = model.evaluate(xi, 0, tau, blocks, null, null)[0];
      tau[5] = t2;
      const f2 = model.evaluate(xi, 0, tau, blocks, null, null)[0];
      const ref = -(logpdf(Math.exp(t2), alpha, q) + t2) + (logpdf(Math.exp(t1), alpha, q) + t1);
      expect(
        Math.abs(f2 - f1 - ref),
        `τ ${t1} → ${t2}: objective change ${f2 - f1}, @stdlib ${ref}`,
      ).toBeLessThan(1e-9);
    }
    model.dispose();
  });
});
