/**
 * The joint-run form's rows (one per chosen image, reference first) as typed, and the request they make.
 * Empty fields mean "from the header or estimated"; numbers are read leniently and checked here so a person
 * sees which field of which image is wrong before anything is sent.
 */
import type { CreateJointRunRequest, JointImageOptions } from '@shared/joint-runs';
import type { SeparationPreset } from '@shared/separation-settings';

export interface JointFormRow {
  imageId: number;
  name: string;
  likelihood: 'gaussian' | 'poisson' | null;
  sigma: string;
  fwhmMajor: string;
  fwhmMinor: string;
  pa: string;
  unit: string;
}

export const emptyRow = (imageId: number, name: string): JointFormRow => ({
  imageId,
  name,
  likelihood: null,
  sigma: '',
  fwhmMajor: '',
  fwhmMinor: '',
  pa: '',
  unit: '',
});

const number = (text: string): number | null => {
  const trimmed = text.trim();
  if (trimmed === '') return null;
  const value = Number(trimmed);
  return Number.isFinite(value) ? value : NaN;
};

/** The problems of one row, by field (empty when it is fine). */
export function rowIssues(row: JointFormRow): Partial<Record<'sigma' | 'psf' | 'pa', string>> {
  const issues: Partial<Record<'sigma' | 'psf' | 'pa', string>> = {};
  const sigma = number(row.sigma);
  if (sigma !== null && !(sigma > 0)) issues.sigma = 'σ must be a positive number';
  const major = number(row.fwhmMajor);
  const minor = number(row.fwhmMinor);
  const pa = number(row.pa);
  if (major !== null || minor !== null) {
    if (major === null || minor === null) issues.psf = 'Give both FWHMs, or neither';
    else if (!(major > 0) || !(minor > 0)) issues.psf = 'FWHMs must be positive numbers of pixels';
    else if (minor > major) issues.psf = 'The minor-axis FWHM must not exceed the major-axis FWHM';
  }
  if (pa !== null && Number.isNaN(pa)) issues.pa = 'PA must be a number of degrees';
  return issues;
}

export function rowOptions(row: JointFormRow): JointImageOptions {
  const options: JointImageOptions = {};
  if (row.likelihood) options.likelihood = row.likelihood;
  const sigma = number(row.sigma);
  if (sigma !== null) options.noiseSigma = sigma;
  const major = number(row.fwhmMajor);
  const minor = number(row.fwhmMinor);
  if (major !== null && minor !== null)
    options.psf = { fwhmMajor: major, fwhmMinor: minor, pa: number(row.pa) ?? 0 };
  if (row.unit.trim()) options.unit = row.unit.trim();
  return options;
}

export function jointRequest(
  rows: JointFormRow[],
  settings: { preset: SeparationPreset; maxIterations?: number | null },
): CreateJointRunRequest {
  return {
    images: rows.map((row) => ({ imageId: row.imageId, options: rowOptions(row) })),
    settings: {
      preset: settings.preset,
      ...(settings.maxIterations ? { maxIterations: settings.maxIterations } : {}),
    },
  };
}

/** Moves row `index` by `delta` (−1 up, +1 down); the first row is the reference. */
export function moveRow<T>(rows: T[], index: number, delta: number): T[] {
  const target = index + delta;
  if (target < 0 || target >= rows.length) return rows;
  const next = [...rows];
  [next[index], next[target]] = [next[target]!, next[index]!];
  return next;
}
