/**
 * A cross-match result as a {@link CatalogueTable}, so the same CSV, VOTable and FITS writers export it.
 * One row per matched pair (match = 'pair'), then our unmatched sources ('ours-only'), then theirs
 * ('theirs-only'); columns of the missing side are null. Offsets are ours − theirs.
 * The match radius and the offset and flux-ratio summaries are table parameters.
 */
import type {
  CatalogueProvenance,
  CatalogueTable,
  CellValue,
  TableColumn,
  TableParameter,
} from './catalogue-table';
import type { CrossMatchResult } from './cross-match';

/** What the table needs of each side: an id and a position (sky or pixel) and, optionally, a flux. */
export interface MatchTableEntry {
  id: number | string | null;
  ra?: number | null;
  dec?: number | null;
  x?: number | null;
  y?: number | null;
  flux?: number | null;
}

function skyColumns(): TableColumn[] {
  return [
    {
      name: 'our_ra',
      datatype: 'double',
      unit: 'deg',
      ucd: 'pos.eq.ra;meta.main',
      description: 'Our right ascension',
      inFrame: true,
    },
    {
      name: 'our_dec',
      datatype: 'double',
      unit: 'deg',
      ucd: 'pos.eq.dec;meta.main',
      description: 'Our declination',
      inFrame: true,
    },
    {
      name: 'their_ra',
      datatype: 'double',
      unit: 'deg',
      ucd: 'pos.eq.ra',
      description: 'Reference right ascension',
    },
    {
      name: 'their_dec',
      datatype: 'double',
      unit: 'deg',
      ucd: 'pos.eq.dec',
      description: 'Reference declination',
    },
    {
      name: 'separation',
      datatype: 'double',
      unit: 'arcsec',
      ucd: 'pos.angDistance',
      description: 'Great-circle separation',
    },
    {
      name: 'delta_ra_cosdec',
      datatype: 'double',
      unit: 'arcsec',
      ucd: 'pos.eq.ra;arith.diff',
      description: '(our RA - their RA) * cos(mean Dec)',
    },
    {
      name: 'delta_dec',
      datatype: 'double',
      unit: 'arcsec',
      ucd: 'pos.eq.dec;arith.diff',
      description: 'our Dec - their Dec',
    },
  ];
}

function pixelColumns(): TableColumn[] {
  return [
    {
      name: 'our_x',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.x;instr.pixel',
      description: 'Our x (FITS 1-based)',
    },
    {
      name: 'our_y',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.y;instr.pixel',
      description: 'Our y (FITS 1-based)',
    },
    {
      name: 'their_x',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.x',
      description: 'Reference x',
    },
    {
      name: 'their_y',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.y',
      description: 'Reference y',
    },
    {
      name: 'separation',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.distance',
      description: 'Separation in pixels',
    },
    {
      name: 'delta_x',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.x;arith.diff',
      description: 'our x - their x',
    },
    {
      name: 'delta_y',
      datatype: 'double',
      unit: 'pixel',
      ucd: 'pos.cartesian.y;arith.diff',
      description: 'our y - their y',
    },
  ];
}

function numberOrNull(value: number | null | undefined): number | null {
  return value === undefined || value === null || !Number.isFinite(value) ? null : value;
}

/**
 * Builds the matched table. `ourFluxUnit` / `theirFluxUnit` label the flux columns (VOUnit strings, '' if unknown).
 */
export function crossMatchToTable(
  result: CrossMatchResult,
  ours: readonly MatchTableEntry[],
  theirs: readonly MatchTableEntry[],
  provenance: CatalogueProvenance,
  units: { ourFlux: string; theirFlux: string } = { ourFlux: '', theirFlux: '' },
): CatalogueTable {
  const sky = result.mode === 'sky';
  const columns: TableColumn[] = [
    {
      name: 'match',
      datatype: 'char',
      unit: '',
      ucd: 'meta.code',
      description: 'pair, ours-only or theirs-only',
    },
    {
      name: 'our_id',
      datatype: 'char',
      unit: '',
      ucd: 'meta.id;meta.main',
      description: 'Id in our catalogue',
    },
    {
      name: 'their_id',
      datatype: 'char',
      unit: '',
      ucd: 'meta.id.cross',
      description: 'Id in the reference catalogue',
    },
    ...(sky ? skyColumns() : pixelColumns()),
    { name: 'our_flux', datatype: 'double', unit: units.ourFlux, ucd: 'phot.flux', description: 'Our flux' },
    {
      name: 'their_flux',
      datatype: 'double',
      unit: units.theirFlux,
      ucd: 'phot.flux',
      description: 'Reference flux',
    },
    {
      name: 'flux_ratio',
      datatype: 'double',
      unit: '',
      ucd: 'phot.flux;arith.ratio',
      description: 'our flux / their flux',
    },
  ];
  const idText = (entry: MatchTableEntry | undefined): string | null =>
    entry === undefined || entry.id === null ? null : String(entry.id);
  const position = (entry: MatchTableEntry | undefined): CellValue[] =>
    entry === undefined
      ? [null, null]
      : sky
        ? [numberOrNull(entry.ra), numberOrNull(entry.dec)]
        : [numberOrNull(entry.x), numberOrNull(entry.y)];
  const row = (
    kind: string,
    a: MatchTableEntry | undefined,
    b: MatchTableEntry | undefined,
    pair?: CrossMatchResult['pairs'][number],
  ): CellValue[] => [
    kind,
    idText(a),
    idText(b),
    ...position(a),
    ...position(b),
    pair?.separation ?? null,
    pair?.offset1 ?? null,
    pair?.offset2 ?? null,
    numberOrNull(a?.flux),
    numberOrNull(b?.flux),
    pair?.fluxRatio ?? null,
  ];
  const rows = [
    ...result.pairs.map((pair) => row('pair', ours[pair.ours], theirs[pair.theirs], pair)),
    ...result.onlyOurs.map((i) => row('ours-only', ours[i], undefined)),
    ...result.onlyTheirs.map((j) => row('theirs-only', undefined, theirs[j])),
  ];
  const unit = result.unit;
  const summary: [string, number | null, string, string, string][] = [
    ['radius', result.radius, unit, sky ? 'pos.angDistance' : 'pos.distance', 'Match radius'],
    ['npairs', result.pairs.length, '', 'meta.number', 'Matched pairs'],
    ['nours', result.onlyOurs.length, '', 'meta.number', 'Our sources without a partner'],
    ['ntheirs', result.onlyTheirs.length, '', 'meta.number', 'Reference sources without a partner'],
    [
      'mean_d1',
      result.offsets.mean1,
      unit,
      `${sky ? 'pos.eq.ra' : 'pos.cartesian.x'};arith.diff;stat.mean`,
      sky ? 'Mean delta_ra_cosdec' : 'Mean delta_x',
    ],
    ['err_d1', result.offsets.mean1Err, unit, 'stat.error;stat.mean', 'Standard error of mean_d1'],
    [
      'mean_d2',
      result.offsets.mean2,
      unit,
      `${sky ? 'pos.eq.dec' : 'pos.cartesian.y'};arith.diff;stat.mean`,
      sky ? 'Mean delta_dec' : 'Mean delta_y',
    ],
    ['err_d2', result.offsets.mean2Err, unit, 'stat.error;stat.mean', 'Standard error of mean_d2'],
    [
      'rms_sep',
      result.offsets.rmsSeparation,
      unit,
      sky ? 'stat.stdev;pos.angDistance' : 'stat.stdev;pos.distance',
      'RMS separation of pairs',
    ],
    ['fr_med', result.fluxRatio.median, '', 'phot.flux;arith.ratio', 'Median flux ratio'],
    [
      'fr_err',
      result.fluxRatio.medianErr,
      '',
      'stat.error;arith.ratio',
      'Standard error of the median flux ratio',
    ],
    [
      'fr_scat',
      result.fluxRatio.robustScatter,
      '',
      'stat.stdev;arith.ratio',
      'Robust scatter (1.4826 MAD) of the flux ratio',
    ],
  ];
  const parameters: TableParameter[] = summary
    .filter((item): item is [string, number, string, string, string] => item[1] !== null)
    .map(([name, value, paramUnit, ucd, description]) => ({
      name,
      value,
      unit: paramUnit,
      ucd,
      description,
    }));
  return { title: 'Skysieve cross-match', columns, rows, provenance, parameters };
}
