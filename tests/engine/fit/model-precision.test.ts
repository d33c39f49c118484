// @vitest-environment node
import { describe, expect, it } from 'vitest';
import { SeparationModel } from '../../../server/engine/fit/model';
import { modeWavenumbers, powerLawSpectrum } from '../../../server/engine/fit/spectrum';
import { psfFromFwhm, psfKernelOnGrid } from '../../../server/engine/psf';
import { lcg } from '../../support/lcg';

function makeModel(
  width: number,
  height: number,
  pw: number,
  ph: number,
  precision: 'float32' | 'float64' = 'float64',
): SeparationModel {
  const rand = lcg(7);
  const data = Float64Array.from({ length: width * height }, () => 3 + rand());
  const valid = new Uint8Array(width * height).fill(1);
  const inverseVariance = Float64Array.from({ length: width * height }, () => 0.5 + rand());
  const model = new SeparationModel({
    width,
    height,
    paddedWidth: pw,
    paddedHeight: ph,
    data,
    valid,
    noise: { kind: 'gaussian', inverseVariance },
    kernel: psfKernelOnGrid(psfFromFwhm(3, 2, 30), pw, ph),
    alpha: 1.5,
    q: 0.2,
    precision,
  });
  model.setSpectrum(
    powerLawSpectrum(
      modeWavenumbers(pw, ph),
      { amplitude: 0.01, slope: 3, turnover: 1 / pw },
      null,
      new Float64Array(pw * ph),
    ),
  );
  return model;
}

function norm(a: Float64Array): number {
  let s = 0;
  for (const v of a) s += v * v;
  return Math.sqrt(s);
}

describe('SeparationModel FFT precision', () => {
  it('gives the float64 objective and gradient to float32 accuracy, and float64 again bit for bit', () => {
    const models = [
      makeModel(48, 40, 64, 64),
      makeModel(48, 40, 64, 64, 'float32'),
      makeModel(48, 40, 64, 64),
    ];
    try {
      expect(models.map((m) => m.precision)).toEqual(['float64', 'float32', 'float64']);
      const rand = lcg(3);
      const xi = Float64Array.from({ length: models[0]!.n }, () => rand() - 0.5);
      const tau = Float64Array.from({ length: models[0]!.m }, () => Math.log(0.1 + 2 * rand()));
      const mu = Math.log(2.5);
      const blocks = { diffuse: true, compact: true };
      const run = (
        model: SeparationModel,
      ): { f: number; gMu: number; gXi: Float64Array; gTau: Float64Array } => {
        const gXi = new Float64Array(model.n);
        const gTau = new Float64Array(model.m);
        const [f, gMu] = model.evaluate(xi, mu, tau, blocks, gXi, gTau);
        return { f, gMu, gXi, gTau };
      };
      const [a, b, c] = models.map(run) as [
        ReturnType<typeof run>,
        ReturnType<typeof run>,
        ReturnType<typeof run>,
      ];
      // float32 carries ~6e−8 relative per value (IEEE 754 binary32); after a few FFT passes over 4096 values
      // 1e−5 relative is a generous bound, far above which the float32 path would be broken.
      const tolF = 1e-5 * Math.abs(a.f);
      expect(Math.abs(b.f - a.f), `f64 ${a.f}, f32 ${b.f}, tolerance ${tolF}`).toBeLessThan(tolF);
      for (const [name, ga, gb] of [
        ['xi', a.gXi, b.gXi],
        ['tau', a.gTau, b.gTau],
      ] as const) {
        const diff = ga.map((v, i) => v - gb[i]!);
        const rel = norm(diff) / norm(ga);
        expect(rel, `gradient ${name}: relative L2 difference ${rel}, tolerance 1e-4`).toBeLessThan(1e-4);
      }
      // deterministic: the same setup in float64 again, bit for bit, and a second evaluation of the same model
      // (the workspaces it reuses leave nothing behind)
      expect(c.f).toBe(a.f);
      expect(c.gMu).toBe(a.gMu);
      expect(Array.from(c.gXi)).toEqual(Array.from(a.gXi));
      const again = run(models[1]!);
      expect(again.f).toBe(b.f);
      expect(Array.from(again.gXi)).toEqual(Array.from(b.gXi));
    } finally {
      for (const m of models) m.dispose();
    }
  });

  it('gives the same float32 objective and gradient with ξ in the kernel memory (SIMD passes) as without', () => {
    const model = makeModel(48, 40, 64, 64, 'float32');
    try {
      const rand = lcg(9);
      const plain = Float64Array.from({ length: model.n }, () => rand() - 0.5);
      const inKernelMemory = model.newCoefficients();
      inKernelMemory.set(plain);
      const tau = Float64Array.from({ length: model.m }, () => Math.log(0.1 + 2 * rand()));
      const blocks = { diffuse: true, compact: true };
      const run = (xi: Float64Array): { f: number; gMu: number; gXi: Float64Array } => {
        const gXi = new Float64Array(model.n);
        const [f, gMu] = model.evaluate(xi, Math.log(2.5), tau, blocks, gXi, new Float64Array(model.m));
        return { f, gMu, gXi };
      };
      const a = run(plain);
      const b = run(inKernelMemory);
      // the kernels' exp is a few float32 ulp from the correctly rounded one (tests/engine/simd); everything
      // else rounds as the plain loops do, so the two differ by float32 rounding only
      expect(Math.abs(b.f - a.f) / Math.abs(a.f)).toBeLessThan(1e-6);
      expect(Math.abs(b.gMu - a.gMu) / Math.abs(a.gMu)).toBeLessThan(1e-5);
      const diff = a.gXi.map((v, i) => v - b.gXi[i]!);
      expect(norm(diff) / norm(a.gXi)).toBeLessThan(1e-5);
      expect(b.f).not.toBe(a.f); // the kernels did run
    } finally {
      model.dispose();
    }
  });

  it('stays in float64 on a grid the float32 transform does not take', () => {
    const model = makeModel(20, 14, 30, 24, 'float32');
    try {
      expect(model.precision).toBe('float64');
    } finally {
      model.dispose();
    }
  });
});
