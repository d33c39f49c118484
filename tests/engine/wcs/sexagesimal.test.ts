// @vitest-environment node
/**
 * Sexagesimal formatting and parsing against hand-worked examples (1 h = 15°, 1° = 60′ = 3600″),
 * including the rounding carry (59.9996 s → next minute), the wrap at 24 h and the sign of small negative
 * declinations.
 */
import { describe, expect, it } from 'vitest';
import { formatDec, formatRa, parseDec, parseRa } from '../../../server/engine/wcs/sexagesimal';

describe('formatRa', () => {
  const cases: [number, string, string][] = [
    [0, '00:00:00.000', 'zero'],
    [187.5, '12:30:00.000', '12.5 h'],
    // 83.63308° / 15 = 5.5755387 h → 5 h 34 min 31.9392 s (worked: 75° + 8.5° + 0.13308°).
    [83.63308, '05:34:31.939', 'worked example'],
    [15 * (1 + 59 / 60 + 59.9996 / 3600), '02:00:00.000', '59.9996 s carries into the hour'],
    [15 * (1 + 59 / 60 + 59.9994 / 3600), '01:59:59.999', 'just below the carry'],
    [359.99999999, '00:00:00.000', '23:59:59.99999… rounds up and wraps to 0 h'],
    [-15, '23:00:00.000', 'negative angles wrap'],
    [375, '01:00:00.000', 'angles beyond 360° wrap'],
  ];
  for (const [degrees, expected, why] of cases) {
    it(`${degrees}° → ${expected} (${why})`, () => expect(formatRa(degrees)).toBe(expected));
  }
  it('takes the number of decimals', () => {
    expect(formatRa(83.63308, 1)).toBe('05:34:31.9');
    expect(formatRa(83.63308, 0)).toBe('05:34:32');
  });
  it('refuses non-finite angles', () =>
    expect(() => formatRa(NaN)).toThrow('Right ascension must be finite, got NaN'));
});

describe('formatDec', () => {
  const cases: [number, string, string][] = [
    [0, '+00:00:00.00', 'zero'],
    [90, '+90:00:00.00', 'north pole'],
    [-45.5, '-45:30:00.00', 'half degree'],
    // 0.0145° = 0.87′ = 52.2″.
    [22.0145, '+22:00:52.20', 'worked example'],
    // −0.0001° = −0.36″: the sign stays although degrees and minutes are zero.
    [-0.0001, '-00:00:00.36', 'small negative'],
    [-(29 + 59 / 60 + 59.996 / 3600), '-30:00:00.00', '59.996″ carries into the degree'],
    [-(29 + 59 / 60 + 59.994 / 3600), '-29:59:59.99', 'just below the carry'],
  ];
  for (const [degrees, expected, why] of cases) {
    it(`${degrees}° → ${expected} (${why})`, () => expect(formatDec(degrees)).toBe(expected));
  }
  it('refuses |Dec| > 90°', () => {
    expect(() => formatDec(90.5)).toThrow('Declination must lie in [−90°, 90°], got 90.5');
  });
});

describe('parseRa / parseDec', () => {
  it('reads colon, blank and letter separators', () => {
    expect(parseRa('05:34:31.9392')).toBeCloseTo(83.63308, 12);
    expect(parseRa('12h30m00s')).toBe(187.5);
    expect(parseRa('12 30')).toBe(187.5);
    expect(parseRa('12:30.5')).toBeCloseTo(187.625, 12); // 12 h 30.5 min = 12.508333 h
    expect(parseDec('-00:00:00.36')).toBeCloseTo(-0.0001, 14);
    expect(parseDec('+22 00 52.2')).toBeCloseTo(22.0145, 12);
    expect(parseDec('-05d10\'03"')).toBeCloseTo(-(5 + 10 / 60 + 3 / 3600), 12);
    expect(parseDec('−45:30:00')).toBe(-45.5); // Unicode minus
  });
  it('refuses impossible fields with a message', () => {
    expect(() => parseRa('24:00:00')).toThrow("Right ascension '24:00:00' is outside 0–24 h");
    expect(() => parseRa('12:60:00')).toThrow("Cannot read '12:60:00': minutes and seconds must be below 60");
    expect(() => parseRa('12:30:60')).toThrow("Cannot read '12:30:60': minutes and seconds must be below 60");
    expect(() => parseDec('91:00:00')).toThrow("Declination '91:00:00' is outside −90° to +90°");
    expect(() => parseRa('abc')).toThrow(
      "Cannot read 'abc' as a sexagesimal right ascension (expected e.g. '12:30:15.2')",
    );
    expect(() => parseRa('187.5')).toThrow("Cannot read '187.5' as a sexagesimal right ascension");
    expect(() => parseRa('12.5:30:00')).toThrow(
      "Cannot read '12.5:30:00': only the last field of a sexagesimal right ascension may have a fraction",
    );
  });
  it('format → parse returns the angle within half of the last printed digit', () => {
    let seed = 12345;
    const random = (): number => (seed = (seed * 1103515245 + 12345) % 2 ** 31) / 2 ** 31;
    for (let i = 0; i < 500; i++) {
      const ra = random() * 360;
      const dec = random() * 180 - 90;
      // 0.0005 s of time = 0.0075″ = 2.1e-6°; 0.005″ = 1.4e-6°.
      const raBack = parseRa(formatRa(ra));
      const raError = Math.min(Math.abs(raBack - ra), 360 - Math.abs(raBack - ra));
      expect(raError, `RA ${ra}: ${formatRa(ra)} → ${raBack}`).toBeLessThanOrEqual(
        (0.0005 * 15) / 3600 + 1e-12,
      );
      expect(Math.abs(parseDec(formatDec(dec)) - dec), `Dec ${dec}: ${formatDec(dec)}`).toBeLessThanOrEqual(
        0.005 / 3600 + 1e-12,
      );
    }
  });
});
