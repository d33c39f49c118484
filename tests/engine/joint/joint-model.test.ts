// @vitest-environment node
/**
 * The joint objective's gradient against central finite differences, for every block (ξ, μ, τ, log scale
 * factors), with one image on the common grid (Gaussian) and one 2× coarser (Gaussian or Poisson), masked
 * pixels included; and the predicted image of a point source keeping its flux on both grids.
 */
import { describe, expect, it } from 'vitest';
import { modeWavenumbers, powerLawSpectrum } from '../../../server/engine/fit/spectrum';
import { conjugateGradient } from '../../../server/engine/joint/joint-fit';
import { JointModel, type JointImageTerm } from '../../../server/engine/joint/joint-model';
import { buildResampler } from '../../../server/engine/joint/resample';
import { psfFromFwhm, psfKernelOnGrid } from '../../../server/engine/psf';
import { lcg } from '../../support/lcg';

const W = 20;
const H = 16;
const PW = 30;
const PH = 24;

function makeModel(second: 'gaussian' | 'poisson'): JointModel {
  const rand = lcg(second === 'gaussian' ? 3 : 4);
  const fine: JointImageTerm = {
    width: W,
    height: H,
    data: Float64Array.from({ length: W * H }, () => 3 + rand()),
    valid: Uint8Array.from({ length: W * H }, (_, i) => (i % 11 === 0 ? 0 : 1)),
    noise: { kind: 'gaussian', inverseVariance: Float64Array.from({ length: W * H }, () => 0.5 + rand()) },
    kernel: psfKernelOnGrid(psfFromFwhm(2.5, 2, 20), PW, PH),
    resampler: buildResampler(W, H, W, H, (x, y) => [x, y]),
    gain: 1,
  };
  const cw = W / 2;
  const ch = H / 2;
  const coarse: JointImageTerm = {
    width: cw,
    height: ch,
    data: Float64Array.from({ length: cw * ch }, () =>
      second === 'gaussian' ? 20 + 4 * rand() : Math.floor(10 + 20 * rand()),
    ),
    valid: Uint8Array.from({ length: cw * ch }, (_, i) => (i % 7 === 3 ? 0 : 1)),
    noise:
      second === 'gaussian'
        ? { kind: 'gaussian', inverseVariance: Float64Array.from({ length: cw * ch }, () => 1 + rand()) }
        : { kind: 'poisson' },
    kernel: psfKernelOnGrid(psfFromFwhm(6, 5, 0), PW, PH),
    // half a fine pixel of shift: the general (area-weighted) case
    resampler: buildResampler(W, H, cw, ch, (x, y) => [
      (x + 0.5) / 2 - 0.5 + 0.13,
      (y + 0.5) / 2 - 0.5 - 0.21,
    ]),
    gain: 1.7,
  };
  const model = new JointModel({
    width: W,
    height: H,
    paddedWidth: PW,
    paddedHeight: PH,
    images: [fine, coarse],
    alpha: 1.5,
    q: 0.2,
    scaleSigma: Math.log(1.05),
  });
  model.setSpectrum(
    powerLawSpectrum(
      modeWavenumbers(PW, PH),
      { amplitude: 0.01, slope: 3, turnover: 1 / 30 },
      null,
      new Float64Array(PW * PH),
    ),
  );
  return model;
}

describe('JointModel gradient', () => {
  for (const second of ['gaussian', 'poisson'] as const) {
    it(`matches central finite differences (coarse image ${second})`, () => {
      const model = makeModel(second);
      const rand = lcg(11);
      const xi = Float64Array.from({ length: model.n }, () => rand() - 0.5);
      const tau = Float64Array.from({ length: model.m }, () => Math.log(0.1 + 2 * rand()));
      const ell = Float64Array.from([0, 0.04]);
      let mu = Math.log(2.5);
      const blocks = { diffuse: true, compact: true, scales: true };
      const gXi = new Float64Array(model.n);
      const gTau = new Float64Array(model.m);
      const gEll = new Float64Array(2);
      const [, gMu] = model.evaluate(xi, mu, tau, ell, blocks, gXi, gTau, gEll);
      const h = 1e-5;
      const f = (): number => model.evaluate(xi, mu, tau, ell, blocks, null, null, null)[0];
      const check = (name: string, arr: Float64Array, grad: Float64Array, indices: number[]): void => {
        for (const i of indices) {
          const keep = arr[i]!;
          arr[i] = keep + h;
          const fp = f();
          arr[i] = keep - h;
          const fm = f();
          arr[i] = keep;
          const fd = (fp - fm) / (2 * h);
          const tol = 2e-5 * Math.max(1, Math.abs(fd));
          expect(
            Math.abs(grad[i]! - fd),
            `${name}[${i}]: analytic ${grad[i]}, finite difference ${fd}`,
          ).toBeLessThan(tol);
        }
      };
      check('xi', xi, gXi, [0, 1, 17, 45, 200, 333, 719]);
      check('tau', tau, gTau, [0, 5, 21, 77, 150, 319]);
      check('ell', ell, gEll, [1]);
      expect(gEll[0]).toBe(0);
      const keep = mu;
      mu = keep + h;
      const fp = f();
      mu = keep - h;
      const fm = f();
      mu = keep;
      const fd = (fp - fm) / (2 * h);
      expect(Math.abs(gMu - fd)).toBeLessThan(2e-5 * Math.max(1, Math.abs(fd)));
      model.dispose();
    });
  }

  it('predicts a point source with the same summed flux in both images (flux conserved to 1e-10)', () => {
    const model = makeModel('gaussian');
    const field = new Float64Array(PW * PH);
    field[8 * PW + 9] = 5;
    const fine = new Float64Array(W * H);
    const coarse = new Float64Array((W / 2) * (H / 2));
    model.predict(0, field, 1, fine);
    model.predict(1, field, 1, coarse);
    const sum = (a: Float64Array): number => a.reduce((s, v) => s + v, 0);
    // The PSF wings beyond the images are lost from both: compare to what falls inside the common region.
    const inside = new Float64Array(PW * PH);
    model.work[0]!.convolver.apply(field, inside);
    let expected = 0;
    for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) expected += inside[y * PW + x]!;
    expect(sum(fine)).toBeCloseTo(expected, 10);
    const insideCoarse = new Float64Array(PW * PH);
    model.work[1]!.convolver.apply(field, insideCoarse);
    const cov = model.setup.images[1]!.resampler;
    let expectedCoarse = 0;
    for (let y = 0; y < H; y++)
      for (let x = 0; x < W; x++) {
        const { weight } = cov.weightsOf(y * W + x);
        expectedCoarse += insideCoarse[y * PW + x]! * weight.reduce((a, b) => a + b, 0);
      }
    expect(sum(coarse) / 1.7).toBeCloseTo(expectedCoarse, 10);
    model.dispose();
  });

  it('has a Gauss–Newton Hessian equal to the finite-difference Hessian where the residual is zero (Gaussian)', () => {
    const model = makeModel('gaussian');
    const rand = lcg(21);
    const xi = Float64Array.from({ length: model.n }, () => 0.3 * (rand() - 0.5));
    const tau = Float64Array.from({ length: model.m }, () => Math.log(0.1 + 2 * rand()));
    const ell = Float64Array.from([0, 0.03]);
    const mu = Math.log(2.5);
    const none = { diffuse: false, compact: false, scales: false };
    // data = the model itself, so the likelihood's second derivative is exactly JᵀWJ
    model.evaluate(xi, mu, tau, ell, none, null, null, null);
    for (let i = 0; i < 2; i++) model.setup.images[i]!.data.set(model.work[i]!.model);
    model.evaluate(xi, mu, tau, ell, none, null, null, null);
    const u = Float64Array.from(tau, (t) => Math.exp(model.clipTau(t)));
    const dim = model.n + 1 + model.m;
    const v = Float64Array.from({ length: dim }, () => rand() - 0.5);
    const hv = new Float64Array(dim);
    model.hessianVector(ell, u, v, hv);
    const cross = new Float64Array(dim);
    model.crossColumn(1, ell, u, cross);
    // gradient along x + h v, central differences
    const blocks = { diffuse: true, compact: true, scales: true };
    const gradient = (h: number) => {
      const x = Float64Array.from(xi, (q, i) => q + h * v[i]!);
      const t = Float64Array.from(tau, (q, i) => q + h * v[model.n + 1 + i]!);
      const gXi = new Float64Array(model.n);
      const gTau = new Float64Array(model.m);
      const gEll = new Float64Array(2);
      const [, gMu] = model.evaluate(x, mu + h * v[model.n]!, t, ell, blocks, gXi, gTau, gEll);
      const g = new Float64Array(dim);
      g.set(gXi);
      g[model.n] = gMu;
      g.set(gTau, model.n + 1);
      return { g, gEll: gEll[1]! };
    };
    const h = 1e-5;
    const plus = gradient(h);
    const minus = gradient(-h);
    let worst = 0;
    let scale = 0;
    for (let i = 0; i < dim; i++) {
      const fd = (plus.g[i]! - minus.g[i]!) / (2 * h);
      worst = Math.max(worst, Math.abs(fd - hv[i]!));
      scale = Math.max(scale, Math.abs(fd));
    }
    expect(worst / scale).toBeLessThan(1e-5);
    // ∂(∂F/∂ℓ)/∂x · v = crossᵀ v
    const fdCross = (plus.gEll - minus.gEll) / (2 * h);
    const dot = cross.reduce((s, c, i) => s + c * v[i]!, 0);
    expect(Math.abs(fdCross - dot)).toBeLessThan(1e-5 * Math.max(1, Math.abs(dot)));
    model.dispose();
  });

  it('solves a preconditioned system by conjugate gradients (against a direct solve)', () => {
    const k = 6;
    const rand = lcg(5);
    const m = Array.from({ length: k * k }, () => rand() - 0.5);
    // A = MᵀM + diag(1…6): symmetric positive definite
    const a = new Float64Array(k * k);
    for (let i = 0; i < k; i++)
      for (let j = 0; j < k; j++) {
        let s = i === j ? i + 1 : 0;
        for (let t = 0; t < k; t++) s += m[t * k + i]! * m[t * k + j]!;
        a[i * k + j] = s;
      }
    const b = Float64Array.from({ length: k }, () => rand());
    const { solution, quadratic } = conjugateGradient(
      (v, out) => {
        for (let i = 0; i < k; i++) {
          let s = 0;
          for (let j = 0; j < k; j++) s += a[i * k + j]! * v[j]!;
          out[i] = s;
        }
      },
      b,
      Float64Array.from({ length: k }, (_, i) => 1 / Math.sqrt(a[i * k + i]!)),
      { maxIterations: 50, relativeChange: 1e-14 },
    );
    for (let i = 0; i < k; i++) {
      let s = 0;
      for (let j = 0; j < k; j++) s += a[i * k + j]! * solution[j]!;
      expect(s).toBeCloseTo(b[i]!, 8);
    }
    expect(quadratic).toBeCloseTo(
      b.reduce((s, v, i) => s + v * solution[i]!, 0),
      10,
    );
  });
});
