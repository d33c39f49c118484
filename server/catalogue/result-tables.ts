/**
 * Completeness, number counts and false-source results as {@link CatalogueTable}s, so they export through the
 * same CSV / VOTable / FITS writers as the catalogue (one row per level or bin; uncertainties as columns).
 * Every table carries the completeness caution in its title, which the VOTable writes as its description.
 */
import type { CatalogueProvenance, CatalogueTable, TableColumn } from './catalogue-table';
import { COMPLETENESS_CAUTION } from './completeness';
import type { FalseSourceBin, LevelResult } from './completeness';
import type { CountsBin } from './number-counts';

const double = (name: string, unit: string, ucd: string, description: string): TableColumn => ({
  name,
  datatype: 'double',
  unit,
  ucd,
  description,
});
const integer = (name: string, ucd: string, description: string): TableColumn => ({
  name,
  datatype: 'int',
  unit: '',
  ucd,
  description,
});

/** Per-level completeness, flux bias and scatter. `fluxUnit` is the catalogue's flux unit. */
export function completenessToTable(
  results: readonly LevelResult[],
  provenance: CatalogueProvenance,
  fluxUnit: string,
  z = 1,
): CatalogueTable {
  return {
    title: `Skysieve completeness by injection (Wilson intervals at z = ${z}). ${COMPLETENESS_CAUTION}`,
    provenance,
    columns: [
      double('flux', fluxUnit, 'phot.flux', 'Injected flux'),
      integer('injected', 'meta.number', 'Artificial sources injected'),
      integer('recovered', 'meta.number', 'Artificial sources recovered'),
      double('completeness', '', 'stat.probability', 'recovered / injected'),
      double('completeness_low', '', 'stat.probability;stat.min', 'Wilson interval, lower end'),
      double('completeness_high', '', 'stat.probability;stat.max', 'Wilson interval, upper end'),
      double('flux_bias', '', 'phot.flux;arith.ratio', 'median(measured / injected) - 1'),
      double('flux_bias_err', '', 'stat.error;phot.flux', 'Standard error of flux_bias'),
      double('flux_scatter', '', 'stat.stdev;phot.flux', '1.4826 MAD of measured / injected'),
      double('pull_median', '', 'stat.value', 'Median of (measured - injected) / flux_err'),
      double('pull_scatter', '', 'stat.stdev', '1.4826 MAD of the pulls (1 for honest errors)'),
    ],
    rows: results.map((r) => [
      r.flux,
      r.injected,
      r.recovered,
      r.completeness,
      r.completenessLow,
      r.completenessHigh,
      r.fluxBias,
      r.fluxBiasErr,
      r.fluxScatter,
      r.pullMedian,
      r.pullScatter,
    ]),
  };
}

/** Differential counts per bin, raw and completeness-corrected, per sr and per deg². */
export function numberCountsToTable(
  bins: readonly CountsBin[],
  provenance: CatalogueProvenance,
  fluxUnit: string,
): CatalogueTable {
  // VOUnit allows one '/', so a compound flux unit (e.g. Jy.pixel/beam) leaves the dN/dS unit blank.
  const perFlux = (perArea: string) =>
    fluxUnit === '' ? perArea : fluxUnit.includes('/') ? '' : `${perArea}/(${fluxUnit})`;
  const perFluxSr = perFlux('sr-1');
  const perFluxDeg2 = perFlux('deg-2');
  return {
    title: `Skysieve differential source counts (Gehrels 1986 1-sigma limits). ${COMPLETENESS_CAUTION}`,
    provenance,
    columns: [
      double('flux_low', fluxUnit, 'phot.flux;stat.min', 'Bin lower edge'),
      double('flux_high', fluxUnit, 'phot.flux;stat.max', 'Bin upper edge'),
      double('flux_centre', fluxUnit, 'phot.flux', 'Geometric-mean flux of the bin'),
      integer('count', 'meta.number', 'Sources in the bin'),
      double('dnds_sr', perFluxSr, 'src.density', 'dN/dS per steradian'),
      double('dnds_sr_low', perFluxSr, 'src.density;stat.min', 'Lower 1-sigma limit'),
      double('dnds_sr_high', perFluxSr, 'src.density;stat.max', 'Upper 1-sigma limit'),
      double('dnds_deg2', perFluxDeg2, 'src.density', 'dN/dS per square degree'),
      double('completeness', '', 'stat.probability', 'Completeness at flux_centre'),
      double('dnds_sr_corrected', perFluxSr, 'src.density', 'Completeness-corrected dN/dS per steradian'),
      double('dnds_sr_corrected_low', perFluxSr, 'src.density;stat.min', 'Lower 1-sigma limit, corrected'),
      double('dnds_sr_corrected_high', perFluxSr, 'src.density;stat.max', 'Upper 1-sigma limit, corrected'),
    ],
    rows: bins.map((bin) => [
      bin.fluxLow,
      bin.fluxHigh,
      bin.fluxCentre,
      bin.count,
      bin.perSr.value,
      bin.perSr.low,
      bin.perSr.high,
      bin.perDeg2.value,
      bin.completeness,
      bin.corrected?.perSr.value ?? null,
      bin.corrected?.perSr.low ?? null,
      bin.corrected?.perSr.high ?? null,
    ]),
  };
}

/** False-source rate and reliability per SNR bin; `rateUnit` is the VOUnit of the rates, e.g. 'deg-2'. */
export function falseSourcesToTable(
  bins: readonly FalseSourceBin[],
  provenance: CatalogueProvenance,
  rateUnit: string,
): CatalogueTable {
  return {
    title: `Skysieve false-source rate from the source-subtracted image. ${COMPLETENESS_CAUTION}`,
    provenance,
    columns: [
      double('snr_low', '', 'stat.snr;stat.min', 'Bin lower edge'),
      double('snr_high', '', 'stat.snr;stat.max', 'Bin upper edge'),
      integer('false_count', 'meta.number', 'Detections on the source-subtracted image'),
      double('rate', rateUnit, 'src.density', 'False sources per unit area'),
      double('rate_low', rateUnit, 'src.density;stat.min', 'Lower 1-sigma limit'),
      double('rate_high', rateUnit, 'src.density;stat.max', 'Upper 1-sigma limit'),
      double('reliability', '', 'stat.probability', '1 - false / real in the bin'),
      double('reliability_low', '', 'stat.probability;stat.min', 'Lower 1-sigma limit'),
      double('reliability_high', '', 'stat.probability;stat.max', 'Upper 1-sigma limit'),
    ],
    rows: bins.map((bin) => [
      bin.snrLow,
      bin.snrHigh,
      bin.count,
      bin.rate,
      bin.rateLow,
      bin.rateHigh,
      bin.reliability,
      bin.reliabilityLow,
      bin.reliabilityHigh,
    ]),
  };
}
