/**
 * Writes the demo images of the invented "Lyra Deep Field" of the imaginary Aster Wide Survey (AWS):
 *   npx tsx samples/generate.ts
 * Each image is a float32 FITS file with a truth JSON beside it (see samples/README.md). Deterministic: the same
 * script writes the same bytes.
 */
import { writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { writeFits } from '../server/engine/io/write-fits';
import { DEMO_FIELDS } from './demo-fields';
import { simulateSky } from './sky-simulator';

const here = dirname(fileURLToPath(import.meta.url));

const round = (v: number, digits: number): number => Number(v.toPrecision(digits));

for (const demo of DEMO_FIELDS) {
  const sky = simulateSky(demo.options);
  const fits = writeFits(
    { width: sky.width, height: sky.height, data: Float32Array.from(sky.image), mask: sky.mask },
    { header: sky.header, cards: [{ keyword: 'HISTORY', comment: `simulated, seed ${demo.options.seed}` }] },
  );
  writeFileSync(join(here, `${demo.name}.fits`), fits);
  const truth = {
    scenario: 'Lyra Deep Field of the Aster Wide Survey (AWS): invented, synthetic data',
    image: `${demo.name}.fits`,
    description: demo.description,
    generator: 'samples/generate.ts (samples/sky-simulator.ts)',
    seed: demo.options.seed,
    width: sky.width,
    height: sky.height,
    unit: demo.options.unit,
    conventions:
      'x, y are FITS 1-based pixel positions (1, 1 = centre of the first pixel); flux is the summed contribution in ' +
      'image units × pixels (PSF of unit sum); fluxDensity = flux / beam area in pixels (Jy for Jy/beam maps); ' +
      'snrTrue is the ideal SNR at the truth with the position known (Poisson: including the source shot noise).',
    psf: { kind: 'gaussian', ...demo.options.psf, beamAreaPx: round(sky.beamAreaPx, 8) },
    noise: demo.options.noise,
    diffuse: demo.options.diffuse,
    flatBackground: demo.options.flatBackground ?? 0,
    blank: demo.options.blank ?? null,
    sourceCounts: {
      law: 'dN/dS ∝ S^-2.5 (Euclidean)',
      minFlux: demo.options.sources.minFlux,
      maxFlux: demo.options.sources.maxFlux,
    },
    sources: sky.truth.sources
      .map((s) => ({
        x: round(s.x + 1, 10),
        y: round(s.y + 1, 10),
        ra: round(s.ra, 10),
        dec: round(s.dec, 10),
        flux: round(s.flux, 8),
        fluxDensity: s.fluxDensity === null ? null : round(s.fluxDensity, 8),
        snrTrue: round(s.snrTrue, 5),
      }))
      .sort((a, b) => b.flux - a.flux),
  };
  writeFileSync(join(here, `${demo.name}.truth.json`), JSON.stringify(truth, null, 2) + '\n');
  console.log(
    `${demo.name}.fits  ${sky.width} × ${sky.height}, ${fits.length} bytes, ${truth.sources.length} sources`,
  );
}
