import { describe, expect, it } from 'vitest';

import type { CrossMatchResultDto } from '@shared/cross-match';
import { defaultRadius, formatWithError, matchMarkers } from '@/components/crossmatch/match-format';

describe('formatWithError', () => {
  it('writes value ± error with the unit, a true minus sign, and a dash without a value', () => {
    expect(formatWithError(-0.75, 0.125, 'arcsec')).toBe('−0.75 ± 0.13″');
    expect(formatWithError(1.5, null, 'pixel')).toBe('1.50 px');
    expect(formatWithError(1.0101, 0.133, '', 3)).toBe('1.010 ± 0.133');
    expect(formatWithError(null, null, 'arcsec')).toBe('—');
  });
});

describe('defaultRadius', () => {
  it('is half the geometric-mean beam FWHM on the sky, else from the PSF', () => {
    // √(6 · 4.5)/2 = 2.598″ (the rule of server/catalogue/cross-match.ts defaultMatchRadiusArcsec).
    expect(defaultRadius('sky', { majorArcsec: 6, minorArcsec: 4.5 }, null, 1.5)!.value).toBeCloseTo(
      2.598076,
      6,
    );
    expect(defaultRadius('sky', null, { major: 4, minor: 4 }, 1.5)).toEqual({ value: 3, from: 'psf' });
    expect(
      defaultRadius('pixel', { majorArcsec: 6, minorArcsec: 4.5 }, { major: 3, minor: 3 }, null),
    ).toEqual({
      value: 1.5,
      from: 'psf',
    });
    expect(defaultRadius('sky', null, null, null)).toBeNull();
  });
});

describe('matchMarkers', () => {
  const result = {
    runId: 42,
    against: { kind: 'reference', id: 3, name: 'AWS band 2' },
    mode: 'sky',
    unit: 'arcsec',
    pairs: [
      {
        ourId: 1,
        theirId: 'AWS-A',
        separation: 1,
        offset1: 0,
        offset2: -1,
        fluxRatio: 0.9,
        ourFlux: 0.01,
        theirFlux: 0.011,
        ourX: 10,
        ourY: 12,
        ourRa: 1,
        ourDec: 2,
        theirX: 10,
        theirY: 12.7,
        theirRa: 1,
        theirDec: 2,
      },
    ],
    onlyOurs: [{ id: '2', x: 30, y: 31, ra: null, dec: null, flux: 0.1 }],
    onlyTheirs: [
      { id: 'AWS-C', x: 40, y: 41, ra: 1, dec: 2, flux: 0.2 },
      { id: 'AWS-far', x: null, y: null, ra: 9, dec: 9, flux: 0.3 },
    ],
  } as unknown as CrossMatchResultDto;

  it('draws ours solid and theirs dashed, skipping entries that fall outside the projection', () => {
    const markers = matchMarkers(result, { majorPixels: 3, minorPixels: 2, paDeg: 10 });
    expect(markers.map((m) => [m.id, m.kind ?? 'primary'])).toEqual([
      ['ours:1', 'primary'],
      ['ours:2', 'primary'],
      ['theirs:AWS-A', 'secondary'],
      ['theirs:AWS-C', 'secondary'],
    ]);
    expect(markers[0]!.details).toEqual(['paired with AWS-A at 1.00″']);
    expect(markers[2]).toMatchObject({ x: 10, y: 12.7, majorPixels: 3, minorPixels: 2, paDeg: 10 });
  });
});
