// @vitest-environment node
/**
 * WCS properties beyond the astropy fixtures: pixel → world → pixel round trips on random pixels of every
 * fixture header, the CROTA2 ↔ CD identity of FITS WCS paper II eq. 189, parity, pixel scales, linear axes,
 * and the headers that must not produce a WCS.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import { parseWcs, parseWcsWithWarnings } from '../../../server/engine/wcs/wcs';
import { seededRandom } from '../../../server/engine/random/mulberry32';

const fixture = JSON.parse(
  readFileSync(new URL('../../fixtures/astropy/wcs/cases.json', import.meta.url), 'utf8'),
) as { cases: { name: string; header: Record<string, string | number> }[] };

const cards = (header: Record<string, string | number>): HeaderCard[] =>
  Object.entries(header).map(([keyword, value]) => ({ keyword, value }));

const ROUND_TRIP_TOLERANCE_PX = 1e-8;

describe('pixel → world → pixel round trip', () => {
  it('has headers to test', () => expect(fixture.cases.length).toBe(24));
  for (const c of fixture.cases) {
    it(`${c.name}: 2000 random pixels within ${ROUND_TRIP_TOLERANCE_PX} px`, () => {
      const wcs = parseWcs(cards(c.header))!;
      const random = seededRandom(7);
      const width = c.header.NAXIS1 as number;
      const height = c.header.NAXIS2 as number;
      let checked = 0;
      for (let i = 0; i < 2000; i++) {
        const x = 0.5 + random() * width;
        const y = 0.5 + random() * height;
        const [lon, lat] = wcs.pixelToWorld(x, y);
        if (!Number.isFinite(lon)) continue; // beyond the horizon of a wide SIN field
        // At a celestial pole the longitude is undefined; the pixel is not recoverable from (lon, lat) there.
        if (Math.abs(lat) > 90 - 1e-9) continue;
        const [bx, by] = wcs.worldToPixel(lon, lat);
        const error = Math.hypot(bx - x, by - y);
        expect(error, `${c.name}: pixel (${x}, ${y}) → (${lon}, ${lat}) → (${bx}, ${by})`).toBeLessThan(
          ROUND_TRIP_TOLERANCE_PX,
        );
        checked++;
      }
      expect(checked).toBeGreaterThan(1000);
    });
  }
});

describe('linear transformation', () => {
  const base = { CTYPE1: 'RA---TAN', CTYPE2: 'DEC--TAN', CRPIX1: 50, CRPIX2: 40, CRVAL1: 200, CRVAL2: 30 };
  it('CROTA2 equals the CD matrix of paper II eq. 189', () => {
    const rho = (31 * Math.PI) / 180;
    const [c1, c2] = [-2e-3, 3e-3];
    const rotated = parseWcs(cards({ ...base, CDELT1: c1, CDELT2: c2, CROTA2: 31 }))!;
    const cd = parseWcs(
      cards({
        ...base,
        CD1_1: c1 * Math.cos(rho),
        CD1_2: -c2 * Math.sin(rho),
        CD2_1: c1 * Math.sin(rho),
        CD2_2: c2 * Math.cos(rho),
      }),
    )!;
    for (const [x, y] of [
      [1, 1],
      [100, 80],
      [13.3, 71.9],
    ] as const) {
      const a = rotated.pixelToWorld(x, y);
      const b = cd.pixelToWorld(x, y);
      expect(Math.abs(a[0] - b[0]) + Math.abs(a[1] - b[1]), `pixel ${x},${y}`).toBeLessThan(1e-12);
    }
  });
  it('pixel scales are the column norms of CD and parity follows det(CD)', () => {
    const wcs = parseWcs(cards({ ...base, CD1_1: -3e-4, CD1_2: 4e-4, CD2_1: 4e-4, CD2_2: 3e-4 }))!;
    const [s1, s2] = wcs.pixelScaleDeg();
    expect(s1).toBeCloseTo(5e-4, 15); // √(3² + 4²) · 1e-4
    expect(s2).toBeCloseTo(5e-4, 15);
    expect(wcs.cdelt1Sign()).toBe(-1); // det = −9e-8 − 16e-8 < 0: east left
    expect(parseWcs(cards({ ...base, CDELT1: 1e-3, CDELT2: 1e-3 }))!.cdelt1Sign()).toBe(1);
    // Swapped axes (DEC first): north along +x and east along +y is the usual sky turned by 90° (east left
    // once north is turned up); east along −y is its mirror image.
    const swapped = parseWcs(
      cards({ ...base, CTYPE1: 'DEC--TAN', CTYPE2: 'RA---TAN', CDELT1: 1e-3, CDELT2: 1e-3 }),
    )!;
    expect(swapped.longitudeAxis).toBe(2);
    expect(swapped.cdelt1Sign()).toBe(-1);
    const mirrored = parseWcs(
      cards({ ...base, CTYPE1: 'DEC--TAN', CTYPE2: 'RA---TAN', CDELT1: 1e-3, CDELT2: -1e-3 }),
    )!;
    expect(mirrored.cdelt1Sign()).toBe(1);
  });
  it('a header without celestial CTYPEs gives a linear WCS', () => {
    const wcs = parseWcs(
      cards({ CTYPE1: 'X', CTYPE2: 'Y', CRPIX1: 1, CRPIX2: 1, CRVAL1: 10, CRVAL2: 20, CDELT1: 2, CDELT2: 3 }),
    )!;
    expect(wcs.isCelestial).toBe(false);
    expect(wcs.pixelToWorld(3, 4)).toEqual([14, 29]);
    expect(wcs.worldToPixel(14, 29)).toEqual([3, 4]);
  });
});

describe('headers without a usable WCS', () => {
  it('no WCS cards → null, no warning', () => {
    expect(parseWcsWithWarnings(cards({ NAXIS: 2, OBJECT: 'x' }))).toEqual({ wcs: null, warnings: [] });
  });
  const base = { CRPIX1: 1, CRPIX2: 1, CRVAL1: 10, CRVAL2: 20, CDELT1: -1e-3, CDELT2: 1e-3 };
  const cases: [string, Record<string, string | number>, string][] = [
    [
      'unsupported projection',
      { ...base, CTYPE1: 'RA---ZEA', CTYPE2: 'DEC--ZEA' },
      'The ZEA projection is not supported (TAN, SIN, ARC, STG, CAR are); the WCS was left out',
    ],
    [
      'mismatched projections',
      { ...base, CTYPE1: 'RA---TAN', CTYPE2: 'DEC--SIN' },
      "CTYPE1 'RA---TAN' and CTYPE2 'DEC--SIN' do not name the same projection",
    ],
    [
      'singular matrix',
      { ...base, CTYPE1: 'RA---TAN', CTYPE2: 'DEC--TAN', CDELT1: 0 },
      'The WCS matrix (CDELT/PC/CD) is singular; the WCS was left out',
    ],
    [
      'a lone celestial axis',
      { ...base, CTYPE1: 'RA---TAN', CTYPE2: 'FREQ' },
      "CTYPE1 'RA---TAN' and CTYPE2 'FREQ' are not a celestial pair; the WCS was left out",
    ],
    [
      'a moved fiducial point',
      { ...base, CTYPE1: 'RA---TAN', CTYPE2: 'DEC--TAN', PV1_1: 5 },
      'PV1_1 (a moved fiducial point) is not supported; the WCS was left out',
    ],
  ];
  for (const [name, header, warning] of cases) {
    it(`${name} → null with a warning`, () => {
      expect(parseWcsWithWarnings(cards(header))).toEqual({ wcs: null, warnings: [warning] });
    });
  }
  it('SIP named in CTYPE without its polynomials, and other distortions, are named in a warning', () => {
    const sip = parseWcsWithWarnings(cards({ ...base, CTYPE1: 'RA---TAN-SIP', CTYPE2: 'DEC--TAN-SIP' }));
    expect(sip.wcs?.projection).toBe('TAN');
    expect(sip.warnings).toEqual([
      'CTYPE names SIP distortion but A_ORDER/B_ORDER are missing; positions ignore it',
    ]);
    const tpv = parseWcsWithWarnings(cards({ ...base, CTYPE1: 'RA---TAN-TPV', CTYPE2: 'DEC--TAN-TPV' }));
    expect(tpv.warnings).toEqual(["The distortion '-TPV' in CTYPE is not supported; positions ignore it"]);
  });
});
