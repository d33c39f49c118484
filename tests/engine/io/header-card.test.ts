// @vitest-environment node
/**
 * Header cards against the layout rules of the FITS Standard 4.0, section 4 (hand-worked card images):
 * keyword in columns 1–8, "= " in 9–10, fixed-format numbers and logicals right-justified to column 30,
 * strings opening in column 11 with at least 8 characters inside the quotes, doubled quotes, comments after
 * " / ", CONTINUE long strings (section 4.2.1.2), reals with a D exponent (section 4.2.4).
 */
import { describe, expect, it } from 'vitest';
import {
  formatCard,
  formatHeader,
  formatReal,
  padToBlock,
  parseCard,
  parseHeader,
} from '../../../server/engine/io/header-card';

const card = (text: string): string => text.padEnd(80);

describe('formatCard', () => {
  it('writes fixed-format values (column 30 for numbers and logicals)', () => {
    expect(formatCard({ keyword: 'SIMPLE', value: true })).toEqual([card('SIMPLE  =                    T')]);
    expect(formatCard({ keyword: 'NAXIS1', value: 1024, comment: 'width' })).toEqual([
      card('NAXIS1  =                 1024 / width'),
    ]);
    expect(formatCard({ keyword: 'CDELT1', value: -2.7777778e-4 })).toEqual([
      card('CDELT1  =       -0.00027777778'),
    ]);
    expect(formatCard({ keyword: 'CRVAL2', value: 30, real: true })).toEqual([
      card('CRVAL2  =                 30.0'),
    ]);
    expect(formatCard({ keyword: 'BLANKV', value: null, comment: 'undefined' })).toEqual([
      card('BLANKV  =  / undefined'),
    ]);
  });
  it('writes strings from column 11, padded to 8 characters, quotes doubled', () => {
    expect(formatCard({ keyword: 'CTYPE1', value: 'RA---TAN' })).toEqual([card("CTYPE1  = 'RA---TAN'")]);
    expect(formatCard({ keyword: 'BUNIT', value: 'K' })).toEqual([card("BUNIT   = 'K       '")]);
    // Closing quote in column 20: 8 characters between the quotes after doubling.
    expect(formatCard({ keyword: 'OBJECT', value: "Lyra's" })).toEqual([card("OBJECT  = 'Lyra''s '")]);
    expect(formatCard({ keyword: 'AVOGADRO', value: 6.02214076e23 })).toEqual([
      card('AVOGADRO=       6.02214076E+23'),
    ]);
    expect(formatCard({ keyword: 'TINY', value: -1e-300 })).toEqual([card('TINY    =            -1.0E-300')]);
  });
  it('writes commentary cards and splits long text', () => {
    expect(formatCard({ keyword: 'HISTORY', comment: 'made here' })).toEqual([card('HISTORY made here')]);
    const long = formatCard({ keyword: 'COMMENT', comment: 'z'.repeat(100) });
    expect(long).toEqual([card('COMMENT ' + 'z'.repeat(72)), card('COMMENT ' + 'z'.repeat(28))]);
  });
  it('continues long strings with & and CONTINUE', () => {
    const text = 'a'.repeat(100);
    const records = formatCard({ keyword: 'NOTE', value: text });
    expect(records).toEqual([card(`NOTE    = '${'a'.repeat(67)}&'`), card(`CONTINUE  '${'a'.repeat(33)}'`)]);
    expect(records.every((r) => r.length === 80)).toBe(true);
  });
  it('refuses invalid keywords and non-finite reals', () => {
    expect(() => formatCard({ keyword: 'TOO_LONG_KEY', value: 1 })).toThrow(
      "Invalid FITS keyword 'TOO_LONG_KEY'",
    );
    expect(() => formatCard({ keyword: 'X', value: NaN })).toThrow(
      'FITS header values must be finite, got NaN',
    );
  });
  it('formats reals that read back as the same double', () => {
    for (const x of [0.1, -1e-300, 1 / 3, 6.02214076e23, 2 ** -30, 12345.678]) {
      expect(Number(formatReal(x))).toBe(x);
    }
  });
});

describe('parseCard', () => {
  it('reads fixed- and free-format values with comments', () => {
    expect(parseCard(card('NAXIS   =                    2 / number of axes'))).toEqual({
      keyword: 'NAXIS',
      value: 2,
      comment: 'number of axes',
    });
    expect(parseCard(card('CRVAL1  = 1.5D-03'))).toEqual({ keyword: 'CRVAL1', value: 1.5e-3, real: true });
    expect(parseCard(card('EXTEND  =                    F'))).toEqual({ keyword: 'EXTEND', value: false });
    expect(parseCard(card("OBJECT  = 'a / b ''c''  '  / the / comment"))).toEqual({
      keyword: 'OBJECT',
      value: "a / b 'c'",
      comment: 'the / comment',
    });
    expect(parseCard(card("EMPTY   = ''"))).toEqual({ keyword: 'EMPTY', value: '' });
    expect(parseCard(card("LEAD    = '  x'"))).toEqual({ keyword: 'LEAD', value: '  x' }); // leading blanks kept
    expect(parseCard(card('UNDEF   =   / nothing'))).toEqual({
      keyword: 'UNDEF',
      value: null,
      comment: 'nothing',
    });
    expect(parseCard(card('CPLX    = (1.0, -2.5)'))).toEqual({ keyword: 'CPLX', value: '(1.0, -2.5)' });
  });
  it('reads commentary cards as text, even with "= " in them', () => {
    expect(parseCard(card('HISTORY = not a value'))).toEqual({
      keyword: 'HISTORY',
      comment: '= not a value',
    });
    expect(parseCard(card('        blank keyword text'))).toEqual({
      keyword: '',
      comment: 'blank keyword text',
    });
    expect(parseCard(card('NOVALUE  just text'))).toEqual({ keyword: 'NOVALUE', comment: ' just text' });
  });
  it('reads HIERARCH keywords', () => {
    expect(parseCard(card('HIERARCH ESO DET CHIP = 3 / chip'))).toEqual({
      keyword: 'HIERARCH ESO DET CHIP',
      value: 3,
      comment: 'chip',
    });
  });
});

describe('parseHeader', () => {
  it('joins CONTINUE strings and finds the data offset after the padded header', () => {
    const text = 'q'.repeat(150);
    const header = formatHeader([
      { keyword: 'SIMPLE', value: true },
      { keyword: 'LONG', value: text, comment: 'long' },
      { keyword: 'AFTER', value: 1 },
    ]);
    expect(header.length).toBe(2880);
    const parsed = parseHeader(header, 0)!;
    expect(parsed.dataOffset).toBe(2880);
    expect(parsed.cards).toEqual([
      { keyword: 'SIMPLE', value: true },
      { keyword: 'LONG', value: text, comment: 'long' },
      { keyword: 'AFTER', value: 1 },
    ]);
  });
  it('a header of exactly 36 cards including END takes one block', () => {
    const cards = Array.from({ length: 35 }, (_, i) => ({ keyword: `K${i}`, value: i }));
    const header = formatHeader(cards);
    expect(header.length).toBe(2880);
    expect(formatHeader([...cards, { keyword: 'K35', value: 35 }]).length).toBe(5760);
    expect(parseHeader(header, 0)!.cards.length).toBe(35);
  });
  it('gives up without END, also within the block limit', () => {
    const noEnd = padToBlock(new TextEncoder().encode(card('SIMPLE  =                    T')), 32);
    expect(parseHeader(noEnd, 0)).toBeNull();
    const header = formatHeader([
      { keyword: 'SIMPLE', value: true },
      ...Array.from({ length: 40 }, () => ({ keyword: 'COMMENT', comment: 'x' })),
    ]);
    expect(parseHeader(header, 0, 1)).toBeNull(); // END is in block 2
    expect(parseHeader(header, 0, 2)).not.toBeNull();
  });
});
