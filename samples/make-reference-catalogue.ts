/**
 * Writes an invented reference catalogue of the demo radio field for trying Skysieve's cross-match:
 *   npx tsx samples/make-reference-catalogue.ts
 * samples/aws-lyra-radio.band2.csv: the "AWS band 2" list of the Lyra Deep Field, as if measured at another
 * frequency by another instrument (all invented). Made from samples/aws-lyra-radio.truth.json, seeded, so running
 * it again writes the same bytes:
 * - the true sources with ideal SNR ≥ 6 (the fainter ones are missing, as in a shallower survey);
 * - positions scattered by 0.6″ (1σ per axis) around the truth shifted by +0.4″ in RA·cos Dec and −0.2″ in Dec
 *   (a small systematic offset between the two astrometric frames);
 * - flux densities (Jy) of 0.8 × the truth (a spectral index) with 8 % scatter;
 * - 12 sources that are not in the image's truth (theirs only), a comment line, and two rows that cannot be read
 *   (an empty Dec, an RA of 400°), to show the rejected-row report.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

import { SeededRandom } from './random';

const here = dirname(fileURLToPath(import.meta.url));
const truth = JSON.parse(readFileSync(join(here, 'aws-lyra-radio.truth.json'), 'utf8')) as {
  width: number;
  height: number;
  sources: { ra: number; dec: number; fluxDensity: number; snrTrue: number }[];
};

const random = new SeededRandom(20260202);
const arcsec = 1 / 3600;
const raOffset = 0.4;
const decOffset = -0.2;
const scatter = 0.6;

interface Row {
  ra: number;
  dec: number;
  flux: number;
}
const rows: Row[] = truth.sources
  .filter((source) => source.snrTrue >= 6)
  .map((source) => {
    const cosDec = Math.cos((source.dec * Math.PI) / 180);
    return {
      ra: source.ra + ((raOffset + scatter * random.normal()) * arcsec) / cosDec,
      dec: source.dec + (decOffset + scatter * random.normal()) * arcsec,
      flux: 0.8 * source.fluxDensity * (1 + 0.08 * random.normal()),
    };
  });
// Theirs only: uniform over the field's RA/Dec box.
const ras = truth.sources.map((s) => s.ra);
const decs = truth.sources.map((s) => s.dec);
const [raMin, raMax, decMin, decMax] = [
  Math.min(...ras),
  Math.max(...ras),
  Math.min(...decs),
  Math.max(...decs),
];
for (let i = 0; i < 12; i++) {
  rows.push({
    ra: raMin + (raMax - raMin) * random.uniform(),
    dec: decMin + (decMax - decMin) * random.uniform(),
    flux: 2e-4 + 1e-3 * random.uniform(),
  });
}
rows.sort((a, b) => a.ra - b.ra);

const designation = (row: Row) => {
  const h = row.ra / 15;
  const hh = Math.floor(h);
  const mm = Math.floor((h - hh) * 60);
  const ss = ((h - hh) * 60 - mm) * 60;
  const d = Math.abs(row.dec);
  const dd = Math.floor(d);
  const dm = Math.floor((d - dd) * 60);
  const ds = Math.floor(((d - dd) * 60 - dm) * 60);
  const two = (n: number) => String(n).padStart(2, '0');
  return `AWSB2 J${two(hh)}${two(mm)}${ss.toFixed(1).padStart(4, '0')}${row.dec < 0 ? '-' : '+'}${two(dd)}${two(dm)}${two(ds)}`;
};

const lines = [
  '# AWS band 2 list of the Lyra Deep Field (invented, synthetic; samples/make-reference-catalogue.ts)',
  'name,RAJ2000,DEJ2000,S_int,e_S_int',
  ...rows.map(
    (row) =>
      `${designation(row)},${row.ra.toFixed(7)},${row.dec.toFixed(7)},${row.flux.toPrecision(4)},${(0.08 * row.flux + 2e-5).toPrecision(2)}`,
  ),
  'AWSB2 J185500.0+383000,283.75,,0.001,0.0001',
  'AWSB2 J999999.9+383000,400.0,38.5,0.001,0.0001',
];
writeFileSync(join(here, 'aws-lyra-radio.band2.csv'), lines.join('\n') + '\n');
console.log(
  `aws-lyra-radio.band2.csv: ${rows.length} sources (${rows.length - 12} from the truth, 12 extra), 2 bad rows`,
);
