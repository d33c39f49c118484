// @vitest-environment node
/** separate(): input validation with clear messages, determinism, output shapes, cancellation. */
import { describe, expect, it } from 'vitest';
import { simulateSky } from '../../../samples/sky-simulator';
import { separate, settingsDigest } from '../../../server/engine/separate';
import { resolveSettings } from '../../../shared/separation-settings';

const PSF = { psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 } };

function smallSky(seed: number, noise: { kind: 'gaussian'; sigma: number } | { kind: 'poisson' }) {
  return simulateSky({
    width: 48,
    height: 40,
    seed,
    psf: { fwhmMajorPx: 3, fwhmMinorPx: 3, paDeg: 0 },
    diffuse: { level: noise.kind === 'poisson' ? 2 : 4, logStd: 0.4, slope: 4 },
    sources: { count: 3, minFlux: 60, maxFlux: 200, minSeparationPx: 10 },
    noise,
    wcs: { projection: 'TAN', raDeg: 10, decDeg: 20, pixelArcsec: 2 },
    unit: noise.kind === 'poisson' ? 'count' : 'Jy/beam',
  });
}

describe('separate() input checks', () => {
  const ok = smallSky(1, { kind: 'gaussian', sigma: 1 });
  const base = { width: 48, height: 40, data: ok.image, mask: ok.mask };

  it('refuses images smaller than 16 × 16', async () => {
    await expect(separate({ width: 10, height: 10, data: new Float32Array(100) }, PSF)).rejects.toThrow(
      'Image is 10 × 10 pixels; separation needs at least 16 × 16',
    );
  });
  it('refuses data of the wrong length', async () => {
    await expect(separate({ ...base, data: new Float32Array(5) }, PSF)).rejects.toThrow(
      'Image data has 5 values; a 48 × 40 image needs 1920',
    );
  });
  it('refuses an all-blank image', async () => {
    await expect(separate({ ...base, mask: new Uint8Array(1920) }, PSF)).rejects.toThrow(
      'Every pixel of the image is blank (masked or not a number): nothing to separate',
    );
  });
  it('refuses a constant image', async () => {
    await expect(
      separate({ ...base, data: new Float32Array(1920).fill(2), mask: null }, PSF),
    ).rejects.toThrow('The image is constant (every valid pixel is 2): there is nothing to separate');
  });
  it('refuses an image without any PSF', async () => {
    await expect(separate(base, {})).rejects.toThrow(/No PSF: the image header has no beam/);
  });
  it('refuses negative or non-integer data for the Poisson likelihood', async () => {
    const data = new Float32Array(1920).fill(3);
    data[50] = 2.5;
    await expect(
      separate({ width: 48, height: 40, data }, { ...PSF, likelihood: 'poisson' }),
    ).rejects.toThrow(
      'Poisson likelihood needs counts (whole numbers ≥ 0), but pixel (3, 2) holds 2.5; use the gaussian likelihood for this image',
    );
    data[50] = -1;
    await expect(
      separate({ width: 48, height: 40, data }, { ...PSF, likelihood: 'poisson' }),
    ).rejects.toThrow(/pixel \(3, 2\) holds -1/);
  });
  it('refuses bad settings with the field named', async () => {
    await expect(separate(base, { ...PSF, compactAlpha: -2 })).rejects.toThrow(/compactAlpha/);
  });
});

describe('separate() results', () => {
  it('is deterministic, fills every output image and lists all settings', async () => {
    const s = smallSky(2, { kind: 'gaussian', sigma: 1 });
    const image = { width: 48, height: 40, data: s.image, mask: s.mask };
    const a = await separate(image, PSF);
    const b = await separate(image, PSF);
    expect(Array.from(b.model)).toEqual(Array.from(a.model));
    expect(b.catalogue).toEqual(a.catalogue);
    expect(b.evaluations).toBe(a.evaluations);
    for (const key of [
      'diffuseSky',
      'diffuse',
      'compactSky',
      'compact',
      'model',
      'residual',
      'residualNorm',
    ] as const) {
      expect(a[key].length, key).toBe(48 * 40);
    }
    expect(a.settings).toEqual(resolveSettings(PSF));
    expect(a.settingsDigest).toMatch(/^[0-9a-f]{64}$/);
    expect(a.settingsDigest).toBe(settingsDigest(resolveSettings({ ...PSF, preset: 'balanced' })));
    expect(a.settingsDigest).not.toBe(settingsDigest(resolveSettings({ ...PSF, threshold: 6 })));
    // the bright sources (SNR ≫ 10) are all found
    expect(a.catalogue.length).toBeGreaterThanOrEqual(3);
    // model = diffuse + compact as they appear in the image
    for (let i = 0; i < 48 * 40; i += 97) {
      expect(Math.abs(a.model[i]! - a.diffuse[i]! - a.compact[i]!)).toBeLessThan(
        1e-4 * (1 + Math.abs(a.model[i]!)),
      );
    }
  }, 60_000);

  it('stops when the signal is aborted', async () => {
    const s = smallSky(3, { kind: 'gaussian', sigma: 1 });
    const controller = new AbortController();
    let calls = 0;
    const run = separate({ width: 48, height: 40, data: s.image }, PSF, {
      signal: controller.signal,
      onProgress: () => {
        calls++;
        if (calls === 3) controller.abort();
      },
    });
    await expect(run).rejects.toThrow(/abort/i);
    expect(calls).toBe(3);
  }, 60_000);
});
