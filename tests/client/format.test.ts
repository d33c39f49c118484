import { describe, expect, it } from 'vitest';

import { formatBytes, usageFraction } from '@/utils/format';

describe('formatBytes', () => {
  // Binary prefixes as defined in IEC 80000-13 (1 KiB = 1024 B); expected strings worked out by hand.
  it.each([
    [0, '0 B'],
    [1023, '1023 B'],
    [1024, '1.00 KiB'],
    [1536, '1.50 KiB'],
    [5 * 1024 ** 3, '5.00 GiB'],
    [Math.round(4.8 * 1024 ** 3), '4.80 GiB'],
    [2 * 1024 ** 4, '2.00 TiB'],
  ])('%d bytes → %s', (bytes, expected) => {
    expect(formatBytes(bytes)).toBe(expected);
  });

  it('shows a dash for impossible sizes', () => {
    expect(formatBytes(-1)).toBe('—');
    expect(formatBytes(Number.NaN)).toBe('—');
  });
});

describe('usageFraction', () => {
  it('is the share of the quota in use, capped at one', () => {
    expect(usageFraction(1, 4)).toBe(0.25);
    expect(usageFraction(9, 4)).toBe(1);
    expect(usageFraction(0, 0)).toBe(0);
    expect(usageFraction(1, 0)).toBe(1);
  });
});
