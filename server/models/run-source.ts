import { Model } from 'objection';

import type { CatalogueSource, SourceFlag } from '../../shared/catalogue';

/** One catalogue entry of a finished run: the CatalogueSource fields as columns. */
export class RunSource extends Model {
  static override tableName = 'run_sources';
  static override idColumn = ['runId', 'sourceId'];

  runId!: number;
  sourceId!: number;
  x!: number;
  y!: number;
  xErr!: number;
  yErr!: number;
  ra!: number | null;
  dec!: number | null;
  raErrArcsec!: number | null;
  decErrArcsec!: number | null;
  flux!: number;
  fluxErr!: number;
  fluxDensity!: number | null;
  fluxDensityErr!: number | null;
  snr!: number;
  significance!: number | null;
  flags!: SourceFlag[];

  /** The row's columns for a catalogue source of `runId`. */
  static rowOf(runId: number, source: CatalogueSource): Record<string, unknown> {
    return {
      run_id: runId,
      source_id: source.id,
      x: source.x,
      y: source.y,
      x_err: source.xErr,
      y_err: source.yErr,
      ra: source.ra,
      dec: source.dec,
      ra_err_arcsec: source.raErrArcsec,
      dec_err_arcsec: source.decErrArcsec,
      flux: source.flux,
      flux_err: source.fluxErr,
      flux_density: source.fluxDensity,
      flux_density_err: source.fluxDensityErr,
      snr: source.snr,
      significance: source.significance,
      flags: source.flags,
    };
  }

  toCatalogueSource(): CatalogueSource {
    return {
      id: this.sourceId,
      x: this.x,
      y: this.y,
      xErr: this.xErr,
      yErr: this.yErr,
      ra: this.ra,
      dec: this.dec,
      raErrArcsec: this.raErrArcsec,
      decErrArcsec: this.decErrArcsec,
      flux: this.flux,
      fluxErr: this.fluxErr,
      fluxDensity: this.fluxDensity,
      fluxDensityErr: this.fluxDensityErr,
      snr: this.snr,
      significance: this.significance,
      flags: this.flags,
    };
  }
}
