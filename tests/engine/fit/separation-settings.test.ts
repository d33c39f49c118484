// @vitest-environment node
import { describe, expect, it } from 'vitest';
import { resolveSettings, SEPARATION_PRESETS, stableSettingsJson } from '../../../shared/separation-settings';

describe('resolveSettings', () => {
  it('fills every value from the balanced preset by default', () => {
    const s = resolveSettings({});
    expect(s).toEqual({
      preset: 'balanced',
      likelihood: 'gaussian',
      psf: null,
      noiseSigma: null,
      ...SEPARATION_PRESETS.balanced,
    });
    // 5σ detection threshold: common practice.
    expect(s.threshold).toBe(5);
    for (const [key, value] of Object.entries(s)) expect(value, key).not.toBeUndefined();
  });

  it('applies a preset and lets advanced fields override it', () => {
    const s = resolveSettings({ preset: 'structured-background', compactAlpha: 3, likelihood: 'poisson' });
    expect(s.compactAlpha).toBe(3);
    expect(s.seedSnr).toBe(SEPARATION_PRESETS['structured-background'].seedSnr);
    expect(s.likelihood).toBe('poisson');
  });

  it('rejects bad values with readable messages', () => {
    expect(() => resolveSettings({ preset: 'fastest' })).toThrow(/preset/);
    expect(() => resolveSettings({ psf: { fwhmMajor: 2, fwhmMinor: 3, pa: 0 } })).toThrow(
      'PSF minor-axis FWHM must not exceed the major-axis FWHM',
    );
    expect(() => resolveSettings({ threshold: -1 })).toThrow(/threshold/);
    expect(() => resolveSettings({ unknownField: 1 })).toThrow(/unknownField/);
  });
});

describe('stableSettingsJson', () => {
  it('does not depend on key order', () => {
    const a = stableSettingsJson({ b: 1, a: { y: [1, { d: 2, c: 3 }], x: null } });
    const b = stableSettingsJson({ a: { x: null, y: [1, { c: 3, d: 2 }] }, b: 1 });
    expect(a).toBe(b);
    expect(a).toBe('{"a":{"x":null,"y":[1,{"c":3,"d":2}]},"b":1}');
  });
});
