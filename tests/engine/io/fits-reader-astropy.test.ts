// @vitest-environment node
/**
 * FITS reader against astropy.io.fits: tests/fixtures/astropy/fits/make.py wrote the files with astropy and
 * recorded in cases.json what astropy parses from them (every stored pixel, scaled in float64 by
 * BZERO + BSCALE · stored; null for blank) and selected header values.
 * Pixel tolerance: 1 float32 ulp of the value (the reader rounds the exact double to float32 once).
 */
import { readFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { cardNumber, cardString, findCard } from '../../../server/engine/io/header-card';
import { readImage } from '../../../server/engine/io/read-image';

interface Case {
  file: string;
  width: number;
  height: number;
  originalAxes: number[];
  plane: number | null;
  cubePlanes: number | null;
  pixels: (number | null)[];
  header: Record<string, string | number | boolean>;
  history: string[];
  comment: string[];
}
const folder = new URL('../../fixtures/astropy/fits/', import.meta.url);
const fixture = JSON.parse(readFileSync(new URL('cases.json', folder), 'utf8')) as {
  astropy: string;
  cases: Case[];
};

const ULP32 = 2 ** -23;

describe(`FITS reader against astropy ${fixture.astropy}`, () => {
  it('finds the fixture files', () => {
    expect(fixture.cases.length).toBe(17);
  });

  for (const c of fixture.cases) {
    it(`${c.file}: size, mask and every pixel as astropy reads them`, () => {
      const bytes = readFileSync(new URL(c.file, folder));
      const image = readImage(bytes, { plane: c.plane ?? undefined, fileName: c.file });
      expect(image.width).toBe(c.width);
      expect(image.height).toBe(c.height);
      expect(image.originalAxes).toEqual(c.originalAxes);
      expect(image.plane).toBe(c.plane);
      expect(image.format).toBe('fits');
      expect(image.data.length).toBe(c.pixels.length);
      let worst = 0;
      for (let i = 0; i < c.pixels.length; i++) {
        const expected = c.pixels[i];
        if (expected === null || expected === undefined) {
          expect(image.mask[i], `${c.file} pixel ${i}: astropy reads blank, mask = ${image.mask[i]}`).toBe(0);
          expect(image.data[i]).toBe(0);
          continue;
        }
        expect(image.mask[i], `${c.file} pixel ${i}: astropy reads ${expected}, masked here`).toBe(1);
        const difference = Math.abs((image.data[i] as number) - expected);
        const tolerance = ULP32 * Math.abs(expected) + 1e-40;
        worst = Math.max(worst, difference / (Math.abs(expected) || 1));
        expect(
          difference,
          `${c.file} pixel ${i}: expected ${expected}, got ${image.data[i]}, difference ${difference}, tolerance ${tolerance}`,
        ).toBeLessThanOrEqual(tolerance);
      }
      // The WCS and the beam come through from the header written by astropy.
      expect(image.wcs?.isCelestial).toBe(true);
      expect(image.beam).toEqual({ majorDeg: 3e-3, minorDeg: 2e-3, paDeg: 35 });
      expect(image.unit).toBe('Jy/beam');
    });
  }

  it('cube3.fits: every plane matches, and the cube without a plane is refused with the range', () => {
    const bytes = readFileSync(new URL('cube3.fits', folder));
    expect(() => readImage(bytes)).toThrow(
      'This FITS file holds a cube of 3 planes along axis 3 (FREQ); choose one with the plane option (1–3)',
    );
    const p1 = readImage(bytes, { plane: 1 });
    const p3 = readImage(bytes, { plane: 3 });
    expect(p1.data).not.toEqual(p3.data);
    expect(() => readImage(bytes, { plane: 4 })).toThrow(
      'Plane 4 does not exist: the cube has planes 1–3 along axis 3 (FREQ)',
    );
  });

  it('degenerate4d.fits: the squeezed planes count as one (plane 1 reads, plane 2 is refused)', () => {
    const bytes = readFileSync(new URL('degenerate4d.fits', folder));
    expect(readImage(bytes, { plane: 1 }).plane).toBeNull();
    expect(() => readImage(bytes, { plane: 2 })).toThrow(
      'Plane 2 does not exist: this image has a single plane',
    );
  });

  it('bitpix-32.fits.gz: two concatenated gzip members read as one stream', () => {
    const gz = readFileSync(new URL('bitpix-32.fits.gz', folder));
    const plain = readImage(readFileSync(new URL('bitpix-32.fits', folder)));
    // Split the plain file in two and gzip each half (RFC 1952 section 2.2: a file may hold several members).
    const raw = readFileSync(new URL('bitpix-32.fits', folder));
    const twoMembers = Buffer.concat([gzipSync(raw.subarray(0, 3000)), gzipSync(raw.subarray(3000))]);
    expect(readImage(twoMembers).data).toEqual(plain.data);
    expect(readImage(gz).data).toEqual(plain.data);
  });

  it('extension-heap.fits: tables with a heap (PCOUNT = 172) are skipped; INHERIT = T takes primary cards', () => {
    const image = readImage(readFileSync(new URL('extension-heap.fits', folder)));
    expect(cardString(image.header, 'EXTNAME')).toBe('SCI');
    // OBSERVER is only in the primary header (make.py); the extension says INHERIT = T.
    expect(cardString(image.header, 'OBSERVER')).toBe('Lyra team');
  });

  it('cards.fits: CONTINUE long string, doubled quotes, logicals, integers, D exponent, HISTORY and COMMENT', () => {
    const c = fixture.cases.find((x) => x.file === 'cards.fits')!;
    const image = readImage(readFileSync(new URL('cards.fits', folder)));
    // Values as astropy reads them (cases.json), except DEXP which astropy also reads as 0.0015.
    expect(cardString(image.header, 'OBSNOTE')).toBe(c.header.OBSNOTE);
    expect((c.header.OBSNOTE as string).length).toBeGreaterThan(68); // really needed CONTINUE cards
    expect(cardString(image.header, 'QUOTED')).toBe(c.header.QUOTED);
    expect(findCard(image.header, 'FLAGT')?.value).toBe(c.header.FLAGT);
    expect(findCard(image.header, 'FLAGF')?.value).toBe(c.header.FLAGF);
    expect(cardNumber(image.header, 'INTVAL')).toBe(c.header.INTVAL);
    expect(cardNumber(image.header, 'DEXP')).toBe(c.header.DEXP);
    expect(image.header.filter((k) => k.keyword === 'HISTORY').map((k) => k.comment)).toEqual(c.history);
    expect(image.header.filter((k) => k.keyword === 'COMMENT').map((k) => k.comment)).toEqual(
      expect.arrayContaining(c.comment),
    );
    expect(image.header.some((k) => k.keyword === 'CONTINUE')).toBe(false);
  });
});
