import { describe, expect, it } from 'vitest';

import type { LevelResultBody, NumberCountsBin } from '@shared/injection';
import {
  completenessFigure,
  countsExportUrl,
  fluxBiasFigure,
  isolatedSourceFlux,
  numberCountsFigure,
  parseLevels,
  studyExportUrl,
} from '@/components/runs/injection-figures';

const level = (overrides: Partial<LevelResultBody>): LevelResultBody => ({
  level: 0,
  flux: 1,
  snr: 5,
  injected: 10,
  recovered: 5,
  completeness: 0.5,
  completenessLow: 0.35,
  completenessHigh: 0.65,
  fluxBias: 0.02,
  fluxBiasErr: 0.01,
  fluxScatter: 0.1,
  pullMedian: 0,
  pullScatter: 1,
  medianSeparationPixels: 0.3,
  ...overrides,
});

describe('parseLevels', () => {
  it('reads numbers separated by commas, semicolons or spaces, sorted', () => {
    expect(parseLevels('8, 3;5  15')).toEqual({ levels: [3, 5, 8, 15] });
    expect(parseLevels('1e-3 2.5e-3')).toEqual({ levels: [0.001, 0.0025] });
  });
  it('refuses empty, non-numeric, non-positive, repeated and too many levels', () => {
    expect(parseLevels('  ')).toEqual({ error: 'Give at least one level.' });
    expect(parseLevels('3, five')).toEqual({ error: '“five” is not a positive number.' });
    expect(parseLevels('0')).toEqual({ error: '“0” is not a positive number.' });
    expect(parseLevels('3 3')).toEqual({ error: 'Levels must all differ.' });
    expect(parseLevels(Array.from({ length: 13 }, (_, k) => k + 1).join(' '))).toEqual({
      error: 'Give at most 12 levels.',
    });
  });
});

describe('completeness and bias figures', () => {
  const levels = [
    level({ level: 1, flux: 4, snr: 20, completeness: 0.9, completenessLow: 0.8, completenessHigh: 0.96 }),
    level({ level: 0, flux: 1, snr: 5, fluxBias: null, fluxBiasErr: null, fluxScatter: null }),
  ];

  it('plots completeness against flux in increasing order with the Wilson interval as asymmetric bars', () => {
    const figure = completenessFigure(levels, 'Jy.pixel/beam');
    const trace = figure.data[0]!;
    expect(trace.x).toEqual([1, 4]);
    expect(trace.y).toEqual([0.5, 0.9]);
    const bars = trace.error_y as { array: number[]; arrayminus: number[]; symmetric: boolean };
    expect(bars.symmetric).toBe(false);
    expect(bars.array[1]).toBeCloseTo(0.06, 12);
    expect(bars.arrayminus[1]).toBeCloseTo(0.1, 12);
    expect(trace.text).toEqual(['5 of 10', '5 of 10']);
    expect(JSON.stringify(figure.layout)).toContain('injected flux (Jy.pixel/beam)');
    expect(completenessFigure(levels, '', 'snr').data[0]!.x).toEqual([5, 20]);
  });

  it('leaves levels with nothing recovered out of the bias plot and draws the scatter as a band', () => {
    const figure = fluxBiasFigure(levels, '');
    expect(figure.data[0]!.x).toEqual([4]);
    expect(figure.data[0]!.y).toEqual([0.02]);
    expect(figure.data[1]!.y).toEqual([0.12000000000000001, -0.08]);
  });
});

describe('number counts figure', () => {
  const value = (v: number) => ({ value: v, low: v * 0.5, high: v * 2 });
  const bin = (overrides: Partial<NumberCountsBin>): NumberCountsBin => ({
    fluxLow: 1,
    fluxHigh: 2,
    fluxCentre: Math.SQRT2,
    count: 3,
    countLow: 1.37,
    countHigh: 5.94,
    perArea: value(100),
    dnds: value(100),
    completeness: 0.8,
    corrected: { count: 3.75, perArea: value(125), dnds: value(125) },
    correctionNote: null,
    ...overrides,
  });

  it('shows raw bins with sources, and corrected ones only where a correction exists', () => {
    const figure = numberCountsFigure(
      [
        bin({}),
        bin({ fluxLow: 2, fluxHigh: 4, fluxCentre: Math.sqrt(8), corrected: null }),
        bin({ count: 0 }),
      ],
      'Jy',
      'deg2',
    );
    expect(figure.data).toHaveLength(2);
    expect(figure.data[0]!.x).toEqual([Math.SQRT2, Math.sqrt(8)]);
    expect(figure.data[1]!.y).toEqual([125]);
    const bars = figure.data[1]!.error_y as { array: number[]; arrayminus: number[] };
    expect(bars.array).toEqual([125]);
    expect(bars.arrayminus).toEqual([62.5]);
    expect(JSON.stringify(figure.layout)).toContain('deg⁻²');
    expect(JSON.stringify(numberCountsFigure([bin({ corrected: null })], '', 'pixel2').layout)).toContain(
      'pixel⁻²',
    );
  });
});

describe('export links', () => {
  it('name the run, the study, the table and the format', () => {
    expect(studyExportUrl(4, 9, 'false-sources', 'votable')).toBe(
      '/api/runs/4/injection-studies/9/export?table=false-sources&format=votable',
    );
    expect(countsExportUrl(4, ' 0.1,0.2 ', 'fits')).toBe(
      '/api/runs/4/number-counts?format=fits&bins=0.1%2C0.2',
    );
  });
});

describe('isolated source flux (form hint)', () => {
  it('is SNR · σ · √(4π s²) for a round Gaussian, s = FWHM / 2.3548', () => {
    // FWHM 3 px → s = 1.27398 px; √(4π) · s = 4.51620; SNR 5, σ = 1e-4 → 2.2581e-3.
    expect(isolatedSourceFlux(5, 1e-4, 3, 3)).toBeCloseTo(2.2581e-3, 6);
    // Elliptical: the geometric mean of the axes counts.
    expect(isolatedSourceFlux(5, 1e-4, 6, 1.5)).toBeCloseTo(isolatedSourceFlux(5, 1e-4, 3, 3), 15);
  });
});
