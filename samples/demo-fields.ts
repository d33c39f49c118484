/**
 * The demo fields of the invented "Lyra Deep Field" of the imaginary Aster Wide Survey (AWS): the simulator
 * settings behind each committed demo image. samples/generate.ts writes them; the tests re-simulate them to check
 * that the committed files are what the script makes.
 */
import type { HeaderCard } from '../server/engine/io/header-card';
import { psfFromFwhm } from '../server/engine/psf';
import { isolatedFluxError, type SkySimulationOptions } from './sky-simulator';

export interface DemoField {
  /** File stem: <name>.fits and <name>.truth.json. */
  name: string;
  description: string;
  options: SkySimulationOptions;
}

const common: HeaderCard[] = [
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

export const DEMO_FIELDS: DemoField[] = [
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
