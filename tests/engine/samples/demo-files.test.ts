// @vitest-environment node
/**
 * The committed demo images: read back with the engine's own FITS reader, compared with a fresh simulation from
 * the same settings (so the files are what samples/generate.ts makes), and run through the source extractor with
 * the true background and a compact field made from the truth (checks the beam/WCS/units chain end to end).
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { readImage } from '../../../server/engine/io/read-image';
import { psfCovariance, psfFromBeam } from '../../../server/engine/psf';
import { extractSources } from '../../../server/engine/sources';
import { DEMO_FIELDS } from '../../../samples/demo-fields';
import { simulateSky, type SimulatedSky } from '../../../samples/sky-simulator';

const samplesDir = join(import.meta.dirname, '../../../samples');

function check(value: number, low: number, high: number, what: string): void {
  if (!(value >= low && value <= high)) throw new Error(`${what}: ${value} is outside [${low}, ${high}]`);
}

function truthCompactField(sky: SimulatedSky): Float64Array {
  const compact = new Float64Array(sky.width * sky.height);
  for (const s of sky.truth.sources) {
    const x = Math.round(s.x);
    const y = Math.round(s.y);
    const k = y * sky.width + x;
    if (x >= 0 && y >= 0 && x < sky.width && y < sky.height) compact[k] = (compact[k] as number) + s.flux;
  }
  return compact;
}

describe('demo files', () => {
  it('there are three demo fields, each with its FITS file and truth', () => {
    expect(DEMO_FIELDS.map((d) => d.name)).toEqual(['aws-lyra-radio', 'aws-lyra-xray', 'aws-lyra-blanked']);
  });

  for (const demo of DEMO_FIELDS) {
    describe(demo.name, () => {
      const image = readImage(readFileSync(join(samplesDir, `${demo.name}.fits`)));
      const truth = JSON.parse(readFileSync(join(samplesDir, `${demo.name}.truth.json`), 'utf8'));
      const sky = simulateSky(demo.options);

      it('holds exactly the pixels a fresh simulation gives (float32), with blanks where the mask says', () => {
        expect([image.width, image.height]).toEqual([sky.width, sky.height]);
        expect(image.unit).toBe(demo.options.unit);
        let blanks = 0;
        for (let i = 0; i < sky.image.length; i++) {
          expect(image.mask[i]).toBe(sky.mask[i]);
          if (!sky.mask[i]) blanks++;
          else if (image.data[i] !== Math.fround(sky.image[i] as number)) {
            throw new Error(`pixel ${i}: file ${image.data[i]}, simulation ${sky.image[i]}`);
          }
        }
        expect(blanks).toBe(demo.options.blank ? sky.mask.length - sky.mask.reduce((s, v) => s + v, 0) : 0);
      });

      it('its truth file lists every simulated source in FITS 1-based pixels', () => {
        expect(truth.sources.length).toBe(demo.options.sources.count);
        const brightest = [...sky.truth.sources].sort((a, b) => b.flux - a.flux)[0]!;
        check(Math.abs(truth.sources[0].x - (brightest.x + 1)), 0, 1e-6, 'x of the brightest');
        check(Math.abs(truth.sources[0].y - (brightest.y + 1)), 0, 1e-6, 'y of the brightest');
        expect(truth.scenario).toContain('invented');
      });

      it('has a celestial WCS, and a beam that gives back the simulated PSF when the unit is per beam', () => {
        expect(image.wcs?.isCelestial).toBe(true);
        expect(image.wcs!.cdelt1Sign()).toBe(-1);
        if (!demo.options.writeBeam) {
          expect(image.beam).toBeNull();
          return;
        }
        const psf = psfFromBeam(image.beam!, image.wcs!.pixelScaleDeg()[0], image.wcs!.cdelt1Sign());
        const a = psfCovariance(psf);
        const b = psfCovariance(sky.psf);
        for (const k of ['xx', 'xy', 'yy'] as const)
          check(Math.abs(a[k] - b[k]), 0, 1e-6, `PSF covariance ${k}`);
      });
    });
  }

  it('radio demo: flux densities and RA/Dec come back with honest errors (true background, truth compact field)', () => {
    const demo = DEMO_FIELDS[0]!;
    const image = readImage(readFileSync(join(samplesDir, `${demo.name}.fits`)));
    const sky = simulateSky(demo.options);
    const psf = psfFromBeam(image.beam!, image.wcs!.pixelScaleDeg()[0], image.wcs!.cdelt1Sign());
    const sigma = demo.options.noise.kind === 'gaussian' ? demo.options.noise.sigma : 0;
    const catalogue = extractSources({
      width: image.width,
      height: image.height,
      data: image.data,
      mask: image.mask,
      noise: { kind: 'gaussian', sigma },
      background: sky.truth.diffuseConvolved,
      compactSky: truthCompactField(sky),
      psf,
      wcs: image.wcs,
      beamAreaPx: sky.beamAreaPx,
    });
    const fluxPulls: number[] = [];
    const raPulls: number[] = [];
    const decPulls: number[] = [];
    let bright = 0;
    for (const t of sky.truth.sources) {
      if (t.snrTrue < 10) continue;
      // Leave out sources with a neighbour of ≥ 10% of their flux within 2 FWHM: unresolved pairs come back as one
      // source (confusion), which says nothing about the error bars.
      const crowded = sky.truth.sources.some(
        (o) =>
          o !== t &&
          o.flux >= 0.1 * t.flux &&
          Math.hypot(o.x - t.x, o.y - t.y) < 2 * demo.options.psf.fwhmMajorPx,
      );
      if (crowded) continue;
      bright++;
      const c = catalogue.find((c) => Math.hypot(c.x - 1 - t.x, c.y - 1 - t.y) < 1.5);
      if (!c || c.flags.includes('blended')) continue;
      fluxPulls.push((c.fluxDensity! - t.fluxDensity!) / c.fluxDensityErr!);
      const cosDec = Math.cos((t.dec * Math.PI) / 180);
      raPulls.push(((c.ra! - t.ra) * cosDec * 3600) / c.raErrArcsec!);
      decPulls.push(((c.dec! - t.dec) * 3600) / c.decErrArcsec!);
    }
    expect(bright).toBeGreaterThan(20);
    expect(fluxPulls.length).toBeGreaterThan(0.85 * bright);
    // A sanity check of the units and WCS chain on one field, not a calibration (that is in
    // tests/engine/sources with ~300 sources): with n ≈ 25 per quantity the RMS of unit-normal pulls scatters by
    // ≈ 1/√(2n) ≈ 0.14, so the bounds are 0.7–1.5 (about 3.5 standard errors above 1).
    const rms = (values: number[]): number =>
      Math.sqrt(values.reduce((a, v) => a + v * v, 0) / values.length);
    check(rms(fluxPulls), 0.7, 1.5, 'flux-density pull RMS (SNR ≥ 10, unblended)');
    check(rms([...raPulls, ...decPulls]), 0.7, 1.5, 'RA·cos Dec and Dec pull RMS');
    for (const pulls of [fluxPulls, raPulls, decPulls]) {
      expect(pulls.filter((p) => Math.abs(p) > 4).length).toBeLessThanOrEqual(1);
    }
  });

  it('X-ray demo: counts sources come back with significances and honest flux errors (true background)', () => {
    const demo = DEMO_FIELDS[1]!;
    const image = readImage(readFileSync(join(samplesDir, `${demo.name}.fits`)));
    const sky = simulateSky(demo.options);
    const catalogue = extractSources({
      width: image.width,
      height: image.height,
      data: image.data,
      mask: image.mask,
      noise: { kind: 'poisson' },
      background: sky.truth.diffuseConvolved,
      compactSky: truthCompactField(sky),
      psf: sky.psf,
      wcs: image.wcs,
    });
    const pulls: number[] = [];
    let expected = 0;
    for (const t of sky.truth.sources) {
      const crowded = sky.truth.sources.some(
        (o) =>
          o !== t &&
          o.flux >= 0.1 * t.flux &&
          Math.hypot(o.x - t.x, o.y - t.y) < 2 * demo.options.psf.fwhmMajorPx,
      );
      // ≥ 15 counts: on 0.02–0.1 counts/pixel of background the likelihood-ratio significance of such a source is
      // far above 5 (its SNR, which includes its own shot noise, is only ≈ √15 ≈ 4).
      if (t.flux < 15 || crowded) continue;
      expected++;
      const c = catalogue.find((c) => Math.hypot(c.x - 1 - t.x, c.y - 1 - t.y) < 1.5);
      expect(
        c,
        `source of ${t.flux.toFixed(0)} counts at ${t.x.toFixed(1)}, ${t.y.toFixed(1)}`,
      ).toBeDefined();
      expect(c!.significance!).toBeGreaterThanOrEqual(5);
      pulls.push((c!.flux - t.flux) / c!.fluxErr);
    }
    expect(expected).toBeGreaterThan(12);
    // n ≈ 15–30: the RMS of unit-normal pulls scatters by ≈ 0.13, bounds 0.7–1.5 as above.
    const rms = Math.sqrt(pulls.reduce((a, v) => a + v * v, 0) / pulls.length);
    check(rms, 0.7, 1.5, 'Poisson flux pull RMS');
  });
});
