import { afterEach, describe, expect, it } from 'vitest';
import { flushPromises, mount, type VueWrapper } from '@vue/test-utils';
import { Quasar } from 'quasar';

import { formatSettingValue, SETTING_LABELS, settingsDifference } from '@shared/comparisons';
import { resolveSettings } from '@shared/separation-settings';
import SettingsDifferenceTable from '@/components/comparisons/SettingsDifferenceTable.vue';
import SkyViewer from '@/components/viewer/SkyViewer.vue';
import {
  crossMatchCautions,
  crossMatchSummary,
  differenceStatistics,
  differenceText,
  runLabels,
  withError,
} from '@/components/comparisons/comparison-text';
import { fluxScatterFigure } from '@/components/comparisons/flux-scatter-figure';
import { makeCrossMatch } from './comparison-support';

let wrapper: VueWrapper | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

describe('settings difference (shared/comparisons.ts)', () => {
  it('keeps only the resolved settings that differ, in the table order, with labels', () => {
    const runs = [
      resolveSettings({ preset: 'balanced', psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 } }),
      resolveSettings({ preset: 'deep-search', psf: { pa: 0, fwhmMinor: 3, fwhmMajor: 3 } }),
      resolveSettings({ preset: 'balanced', threshold: 7, psf: { fwhmMajor: 3, fwhmMinor: 3, pa: 0 } }),
    ] as unknown as Record<string, unknown>[];
    const rows = settingsDifference(runs);
    // deep-search changes compactAlpha, seedSnr, seedRounds and maxIterations (SEPARATION_PRESETS); the third run
    // the threshold; the PSFs are equal whatever the key order.
    expect(rows.map((row) => row.key)).toEqual([
      'preset',
      'compactAlpha',
      'threshold',
      'seedSnr',
      'seedRounds',
      'maxIterations',
    ]);
    const alpha = rows.find((row) => row.key === 'compactAlpha')!;
    expect(alpha.values).toEqual([1.5, 1.25, 1.5]);
    expect(rows.find((row) => row.key === 'threshold')).toMatchObject({
      label: 'Detection threshold',
      unit: 'SNR',
      display: ['5', '5', '7'],
    });
  });
  it('treats a missing key like an estimated value, and lists unknown keys after the known ones', () => {
    const rows = settingsDifference([{ noiseSigma: 0.002, extra: 1 }, { extra: 2 }]);
    expect(rows.map((row) => [row.key, row.label, row.display])).toEqual([
      ['noiseSigma', 'Noise σ', ['0.002', 'estimated from the data']],
      ['extra', 'extra', ['1', '2']],
    ]);
    expect(settingsDifference([{ threshold: 5 }, { threshold: 5 }])).toEqual([]);
  });
  it('has a label for every resolved setting', () => {
    const unlabelled = Object.keys(resolveSettings({})).filter((key) => !SETTING_LABELS[key]);
    expect(unlabelled).toEqual([]);
  });
  it('words the special values', () => {
    expect(formatSettingValue('psf', null)).toBe('from the image header');
    expect(formatSettingValue('psf', { fwhmMajor: 4, fwhmMinor: 3, pa: 20 })).toBe('4 × 3 px, 20°');
    expect(formatSettingValue('likelihood', 'poisson')).toBe('Poisson (counts)');
    expect(formatSettingValue('diffuseSlope', null)).toBe('estimated from the data');
  });
});

describe('SettingsDifferenceTable', () => {
  const runs = [
    { id: 3, label: 'Run 3' },
    { id: 4, label: 'Run 4' },
  ];
  it('shows one column per run and greys estimated values', async () => {
    wrapper = mount(SettingsDifferenceTable, {
      props: { runs, rows: settingsDifference([{ diffuseSlope: null }, { diffuseSlope: 3.5 }]) },
      global: { plugins: [Quasar] },
    });
    await flushPromises();
    expect(wrapper.findAll('thead th').map((th) => th.text())).toEqual(['Setting', 'Run 3', 'Run 4']);
    const cells = wrapper.findAll('[data-test="setting-diffuseSlope"] td');
    expect(cells.map((td) => td.text())).toEqual(['estimated from the data', '3.5']);
    expect(cells[0]!.classes()).toContain('ss-muted');
    expect(cells[1]!.classes()).not.toContain('ss-muted');
  });
  it('says so when nothing differs', async () => {
    wrapper = mount(SettingsDifferenceTable, { props: { runs, rows: [] }, global: { plugins: [Quasar] } });
    await flushPromises();
    expect(wrapper.find('table').exists()).toBe(false);
    expect(wrapper.find('[data-test="settings-same"]').text()).toContain('used the same settings');
  });
});

describe('comparison text', () => {
  it('labels runs by id, with the preset only when the presets differ', () => {
    expect(
      runLabels([
        { id: 12, settings: { preset: 'deep-search' } },
        { id: 13, settings: { preset: 'balanced' } },
      ]),
    ).toEqual(['Run 12 (deep-search)', 'Run 13 (balanced)']);
    expect(
      runLabels([
        { id: 12, settings: { preset: 'balanced' } },
        { id: 13, settings: { preset: 'balanced' } },
      ]),
    ).toEqual(['Run 12', 'Run 13']);
    expect(runLabels([{ id: 12 }])).toEqual(['Run 12']);
  });
  it('rounds a value to the second significant digit of its error', () => {
    expect(withError(0.95238, 0.0311)).toBe('0.952 ± 0.031');
    expect(withError(123.456, 7.8, '″')).toBe('123.5 ± 7.8 ″');
    expect(withError(-0.2, 0.04, '″')).toBe('-0.200 ± 0.040 ″');
    expect(withError(1.5, null)).toBe('1.500');
    expect(withError(null, 0.1)).toBe('—');
  });
  it('summarises a sky match, and a pixel match in pixels', () => {
    const lines = crossMatchSummary(makeCrossMatch(), 'Run 42', 'Run 43');
    const byLabel = Object.fromEntries(lines.map((line) => [line.label, line.value]));
    expect(byLabel).toMatchObject({
      Matched: '3',
      'Only in Run 42': '1 of 4',
      'Only in Run 43': '0 of 3',
      'Match radius': '2.25″ (half the beam FWHM, on the sky)',
      'Mean offset ΔRA·cos Dec (Run 42 − Run 43)': '0.100 ± 0.050 ″',
      'Mean offset ΔDec': '-0.200 ± 0.040 ″',
      'Flux ratio Run 42 / Run 43 (median)': '0.952 ± 0.031',
    });
    const pixel = crossMatchSummary(
      makeCrossMatch({ mode: 'pixel', unit: 'pixel', radius: 1.5, radiusSource: 'psf' }),
      'A',
      'B',
    );
    expect(pixel.find((line) => line.label === 'Match radius')!.value).toBe(
      '1.5 px (half the PSF FWHM, in pixels)',
    );
    expect(pixel.some((line) => line.label === 'Mean offset Δx (A − B)')).toBe(true);
  });
  it('warns about few pairs and about integrated fluxes', () => {
    expect(crossMatchCautions(makeCrossMatch())).toEqual([
      'Only 3 matched source(s): the offsets and the flux ratio are poorly determined.',
    ]);
    const many = makeCrossMatch({
      fluxKind: 'flux',
      counts: { a: 9, b: 9, matched: 9, onlyA: 0, onlyB: 0 },
    });
    expect(crossMatchCautions(many)).toEqual([
      'Fluxes are integrated image units × pixels: the image has no per-beam unit to give flux densities.',
    ]);
  });
});

describe('SkyViewer for differences', () => {
  // Values −1 … 3 in 0.01 steps: min–max limits are −1 and 3, symmetric limits ±3.
  const plane = {
    width: 401,
    height: 1,
    factor: 1,
    sourceWidth: 401,
    sourceHeight: 1,
    data: Float32Array.from({ length: 401 }, (_, k) => -1 + k / 100),
  };
  async function limitsShown(props: Record<string, unknown>) {
    wrapper = mount(SkyViewer, {
      attachTo: document.body,
      props: { plane, ...props },
      global: { plugins: [Quasar] },
    });
    await flushPromises();
    await wrapper.find('[data-test="clip-100"]').trigger('click');
    await flushPromises();
    const lower = (wrapper.find('input[data-test="lower"]').element as HTMLInputElement).value;
    const upper = (wrapper.find('input[data-test="upper"]').element as HTMLInputElement).value;
    wrapper.unmount();
    wrapper = null;
    return [Number(lower), Number(upper)];
  }
  it('centres the clip limits on zero when asked', async () => {
    expect(await limitsShown({})).toEqual([-1, 3]);
    expect(await limitsShown({ symmetricLimits: true })).toEqual([-3, 3]);
  });
  it('offers only the colour maps it is given', async () => {
    wrapper = mount(SkyViewer, {
      props: { plane, colourMaps: ['seesaw'], initialColourMap: 'seesaw' },
      global: { plugins: [Quasar] },
    });
    await flushPromises();
    const select = wrapper
      .findAllComponents({ name: 'QSelect' })
      .find((s) => s.props('label') === 'Colours')!;
    expect(select.props('options')).toEqual([{ label: 'Seesaw (diverging)', value: 'seesaw' }]);
  });
});

describe('difference text', () => {
  it('gives the largest |difference| and the RMS over finite pixels', () => {
    const data = Float32Array.from([3, -4, NaN, 0]);
    expect(differenceStatistics(data)).toEqual({ largest: 4, rms: Math.sqrt(25 / 3), count: 3 });
    expect(differenceText(data, 'Jy/beam')).toBe(
      'Largest |difference| 4.00 Jy/beam, RMS 2.89 Jy/beam (over the shown, block-averaged pixels). ' +
        'No error map of the difference is computed.',
    );
    expect(differenceText(data, 'Jy/beam', 0.5)).toBe(
      'Largest |difference| 4.00 Jy/beam, RMS 2.89 Jy/beam (over the shown, block-averaged pixels). ' +
        'For scale: the image noise σ is 0.500 Jy/beam per pixel; no error map of the difference is computed ' +
        '(both fields are MAP estimates).',
    );
  });
  it('says when the diffuse fields are the same, or when nothing is valid', () => {
    expect(differenceText(new Float32Array(4), null)).toMatch(/^The two diffuse fields are identical/);
    expect(differenceText(Float32Array.from([NaN]), null)).toBe('The difference has no valid pixels.');
  });
  it('uses significant digits for tiny errors', () => {
    expect(withError(1.2e-9, 1.2e-9, '″')).toBe('1.20e-9 ± 1.2e-9 ″');
  });
});

describe('flux–flux figure', () => {
  it('uses log axes for positive fluxes and linear ones when a flux is negative', () => {
    const match = makeCrossMatch();
    expect((fluxScatterFigure(match, 'A', 'B').layout.xaxis as { type: string }).type).toBe('log');
    const faint = makeCrossMatch({
      pairs: [{ ...match.pairs[0]!, a: { ...match.pairs[0]!.a, flux: -0.0004 } }],
    });
    const figure = fluxScatterFigure(faint, 'A', 'B');
    expect((figure.layout.yaxis as { type: string }).type).toBe('linear');
    // The 1:1 line spans the lowest bar end (−0.0004 − 0.001) to the highest.
    const line = figure.data[0] as { x: number[] };
    expect(line.x[0]).toBeCloseTo(-0.0014, 12);
    expect(line.x[1]).toBeCloseTo(Math.max(0.021 + 0.001, -0.0004 + 0.001), 12);
    expect(figure.label).toBe(
      'flux density in A against B for 1 matched sources, with error bars and the 1:1 line',
    );
  });
});
