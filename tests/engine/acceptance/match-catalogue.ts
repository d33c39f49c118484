/**
 * Matching a catalogue to known truth and the figures the acceptance tests assert.
 */
import type { CatalogueSource } from '../../../shared/catalogue';
/** A true source: 0-based position, flux, and its ideal SNR. */
export interface TrueSource {
  x: number;
  y: number;
  flux: number;
  snr: number;
}

export interface Match {
  truth: TrueSource;
  /** true SNR = flux / σ_F */
  trueSnr: number;
  found: CatalogueSource | null;
}

/**
 * One-to-one greedy matching, brightest truth first, within `radius` pixels. Truth positions are 0-based pixel
 * coordinates; catalogue positions are FITS 1-based, so 1 is subtracted.
 */
export function matchCatalogue(
  truth: TrueSource[],
  catalogue: CatalogueSource[],
  radius: number,
): { matches: Match[]; unmatched: CatalogueSource[] } {
  const used = new Set<number>();
  const order = truth.map((t, i) => i).sort((a, b) => truth[b]!.flux - truth[a]!.flux);
  const matches: Match[] = new Array(truth.length);
  for (const i of order) {
    const t = truth[i]!;
    let best = -1;
    let bestD = radius * radius;
    catalogue.forEach((c, j) => {
      if (used.has(j)) return;
      const d = (c.x - 1 - t.x) ** 2 + (c.y - 1 - t.y) ** 2;
      if (d <= bestD) {
        bestD = d;
        best = j;
      }
    });
    if (best >= 0) used.add(best);
    matches[i] = { truth: t, trueSnr: t.snr, found: best >= 0 ? catalogue[best]! : null };
  }
  return { matches, unmatched: catalogue.filter((_, j) => !used.has(j)) };
}

export function median(values: number[]): number {
  const a = values.slice().sort((x, y) => x - y);
  const n = a.length;
  if (n === 0) return NaN;
  return n % 2 ? a[(n - 1) / 2]! : (a[n / 2 - 1]! + a[n / 2]!) / 2;
}

export interface Figures {
  completeness: { bin: string; found: number; total: number; fraction: number }[];
  falseSources: number;
  fluxBias: number;
  pullRms: number;
  pullCount: number;
  positionRatio: { x: number; y: number; count: number };
}

/** σ_PSF is the Gaussian σ of a circular PSF (pixels). */
export function figures(matches: Match[], unmatched: CatalogueSource[], sigmaPsf: number): Figures {
  const bins: [string, number, number][] = [
    ['3-5', 3, 5],
    ['5-7', 5, 7],
    ['7-10', 7, 10],
    ['>=10', 10, Infinity],
    ['>=7', 7, Infinity],
  ];
  const completeness = bins.map(([bin, lo, hi]) => {
    const inBin = matches.filter((m) => m.trueSnr >= lo && m.trueSnr < hi);
    const found = inBin.filter((m) => m.found).length;
    return { bin, found, total: inBin.length, fraction: inBin.length ? found / inBin.length : NaN };
  });
  const bright = matches.filter((m) => m.found && m.trueSnr >= 10);
  const fluxBias = median(bright.map((m) => m.found!.flux / m.truth.flux - 1));
  const pulls = matches
    .filter((m) => m.found && m.trueSnr >= 5)
    .map((m) => (m.found!.flux - m.truth.flux) / m.found!.fluxErr);
  const pullRms = Math.sqrt(pulls.reduce((s, p) => s + p * p, 0) / pulls.length);
  // position error per axis relative to the Fisher limit √2·σ_PSF/SNR (RMS of the ratio)
  let sx = 0;
  let sy = 0;
  for (const m of bright) {
    const limit = (Math.SQRT2 * sigmaPsf) / m.trueSnr;
    sx += ((m.found!.x - 1 - m.truth.x) / limit) ** 2;
    sy += ((m.found!.y - 1 - m.truth.y) / limit) ** 2;
  }
  return {
    completeness,
    falseSources: unmatched.length,
    fluxBias,
    pullRms,
    pullCount: pulls.length,
    positionRatio: {
      x: Math.sqrt(sx / bright.length),
      y: Math.sqrt(sy / bright.length),
      count: bright.length,
    },
  };
}
