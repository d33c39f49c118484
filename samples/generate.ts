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
import { psfFromFwhm } from '../server/engine/psf';
import { isolatedFluxError, simulateSky, type SkySimulationOptions } from './sky-simulator';

const here = dirname(fileURLToPath(import.meta.url));

const common = [
  { keyword: 'OBJECT', value: 'Lyra Deep Field' },
  { keyword: 'TELESCOP', value: 'AWS' },
  {
    keyword: 'COMMENT',
    comment: 'Synthetic image of an invented survey field, made by samples/generate.ts.',
  },
];

function fluxForSnr(fwhmMajorPx: number, fwhmMinorPx: number, sigma: number, snr: number): number {
  return snr * isolatedFluxError(psfFromFwhm(fwhmMajorPx, fwhmMinorPx, 0), sigma);
}

const radioSigma = 2e-5; // Jy/beam
const radioBeam = { fwhmMajorPx: 4.5, fwhmMinorPx: 3.2, paDeg: 35 };
const blankSigma = 3e-5;
const blankBeam = { fwhmMajorPx: 3.6, fwhmMinorPx: 3.6, paDeg: 0 };

const demos: { name: string; description: string; options: SkySimulationOptions }[] = [
  {
    name: 'aws-lyra-radio',
    description:
      'Radio-like restored map in Jy/beam, 512 × 384 pixels of 1.5″, elliptical beam 6.75″ × 4.8″ at PA 35°, ' +
      'Gaussian noise 20 µJy/beam, log-normal diffuse emission with knots, 150 point sources from SNR 3 to 400.',
    options: {
      width: 512,
      height: 384,
      seed: 20260101,
      psf: radioBeam,
      diffuse: { level: 4e-5, logStd: 1.2, slope: 3.6 },
      sources: {
        count: 150,
        minFlux: fluxForSnr(radioBeam.fwhmMajorPx, radioBeam.fwhmMinorPx, radioSigma, 3),
        maxFlux: fluxForSnr(radioBeam.fwhmMajorPx, radioBeam.fwhmMinorPx, radioSigma, 400),
      },
      noise: { kind: 'gaussian', sigma: radioSigma },
      wcs: { projection: 'SIN', raDeg: 283.75, decDeg: 38.6, pixelArcsec: 1.5 },
      unit: 'Jy/beam',
      writeBeam: true,
      cards: [...common, { keyword: 'INSTRUME', value: 'AWS radio array (invented)' }],
    },
  },
  {
    name: 'aws-lyra-xray',
    description:
      'X-ray-like counts image, 256 × 256 pixels of 2″, circular PSF of 2.5 pixels FWHM, Poisson counts on a low ' +
      'background (0.02 counts/pixel flat plus faint log-normal diffuse emission), 80 point sources of 6–3000 counts.',
    options: {
      width: 256,
      height: 256,
      seed: 20260102,
      psf: { fwhmMajorPx: 2.5, fwhmMinorPx: 2.5, paDeg: 0 },
      diffuse: { level: 0.02, logStd: 0.9, slope: 3.2 },
      flatBackground: 0.02,
      sources: { count: 80, minFlux: 6, maxFlux: 3000 },
      noise: { kind: 'poisson' },
      wcs: { projection: 'TAN', raDeg: 283.8, decDeg: 38.62, pixelArcsec: 2 },
      unit: 'count',
      cards: [...common, { keyword: 'INSTRUME', value: 'AWS X-ray imager (invented)' }],
    },
  },
  {
    name: 'aws-lyra-blanked',
    description:
      'Radio-like mosaic tile in Jy/beam, 320 × 288 pixels of 2″, circular beam 7.2″, Gaussian noise 30 µJy/beam, ' +
      'blank (NaN) bands 16 pixels wide along the edges and a blanked circle where a bright source was cut out, ' +
      'diffuse emission and 90 point sources from SNR 3 to 300.',
    options: {
      width: 320,
      height: 288,
      seed: 20260103,
      psf: blankBeam,
      diffuse: { level: 4e-5, logStd: 1.0, slope: 3.4 },
      sources: {
        count: 90,
        minFlux: fluxForSnr(blankBeam.fwhmMajorPx, blankBeam.fwhmMinorPx, blankSigma, 3),
        maxFlux: fluxForSnr(blankBeam.fwhmMajorPx, blankBeam.fwhmMinorPx, blankSigma, 300),
      },
      noise: { kind: 'gaussian', sigma: blankSigma },
      blank: { edgeWidthPx: 16, circles: [{ x: 210, y: 100, radius: 12 }] },
      wcs: { projection: 'TAN', raDeg: 283.9, decDeg: 38.55, pixelArcsec: 2 },
      unit: 'Jy/beam',
      writeBeam: true,
      cards: [...common, { keyword: 'INSTRUME', value: 'AWS radio array (invented)' }],
    },
  },
];

const round = (v: number, digits: number): number => Number(v.toPrecision(digits));

for (const demo of demos) {
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
        x: round(s.x + 1, 8),
        y: round(s.y + 1, 8),
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
