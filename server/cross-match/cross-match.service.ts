/**
 * Cross-matching a finished run's catalogue against a reference catalogue of its project or against another
 * finished run of the project, with the pure matchers of server/catalogue (one-to-one haversine match on the
 * sky, or by pixel position), and the matched table as CSV, VOTable or FITS.
 *
 * Mode: on the sky when both sides have RA/Dec. A run whose image has no celestial WCS is matched by pixel
 * position: against a reference that gives pixel x/y (its file is read again for them when it was stored with
 * RA/Dec), or against another run of the same image; otherwise the request is refused (422) with the reason.
 * Radius: as given, else half the geometric-mean FWHM of the image's restoring beam (sky) or of the run's PSF
 * (pixels; the PSF in arcsec through the pixel scale on the sky when the image has no beam).
 * Our flux: the flux density when the image is per beam (Jy/beam → Jy), else the total flux.
 */
import type { Knex } from 'knex';

import type { CatalogueSource } from '../../shared/catalogue';
import type {
  CrossMatchRequest,
  CrossMatchResultDto,
  MatchedPairDto,
  UnmatchedEntry,
} from '../../shared/cross-match';
import type { BeamSummary, HeaderCardDto, WcsSummary } from '../../shared/images';
import { CATALOGUE_CAUTION, fluxUnits } from '../catalogue/catalogue-table';
import { type CrossMatchResult, defaultMatchRadiusArcsec } from '../catalogue/cross-match';
import { catalogueProvenance, type Download, tableDownload, type TableFormat } from '../catalogue/downloads';
import { matchRuns, matchToReference, referenceTableEntries } from '../catalogue/match-reference';
import { crossMatchToTable, type MatchTableEntry } from '../catalogue/match-table';
import {
  type ReferenceCatalogue as ReadCatalogue,
  readReferenceCatalogue,
  ReferenceCatalogueError,
} from '../catalogue/read-reference';
import type { AppContext } from '../context';
import { parseWcs, type Wcs } from '../engine/wcs/wcs';
import { AppError, conflict, notFound } from '../http/app-error';
import { isoDate } from '../models/base-model';
import { Run } from '../models/run';
import { RunSource } from '../models/run-source';
import { loadForMatching } from './reference-catalogues.service';

const unprocessable = (message: string) => new AppError('unprocessable', message);

interface ImageFacts {
  name: string;
  contentSha256: string;
  unit: string | null;
  header: HeaderCardDto[];
  wcs: WcsSummary | null;
  beam: BeamSummary | null;
  width: number;
  height: number;
}

async function imageFacts(knex: Knex, imageId: number): Promise<ImageFacts> {
  const image = (await knex('images')
    .where('id', imageId)
    .first('name', 'contentSha256', 'unit', 'header', 'wcs', 'beam', 'width', 'height')) as
    ImageFacts | undefined;
  if (!image) throw notFound('The image of this run no longer exists.');
  return image;
}

function requireSucceeded(run: Run, which: string): void {
  if (run.status === 'succeeded') return;
  throw conflict(
    run.status === 'queued' || run.status === 'running'
      ? `${which} (run ${run.id}) is ${run.status}; it can be matched once it has succeeded.`
      : `${which} (run ${run.id}) ${run.status === 'failed' ? 'failed' : 'was cancelled'} and has no catalogue to match.`,
  );
}

async function sourcesOf(runId: number): Promise<CatalogueSource[]> {
  const rows = await RunSource.query().where('runId', runId).orderBy('sourceId');
  return rows.map((row) => row.toCatalogueSource());
}

/** The run's PSF FWHM in pixels from its diagnostics (null when not stored). */
async function psfFwhmPx(knex: Knex, runId: number): Promise<{ major: number; minor: number } | null> {
  const row = (await knex('runs').where('id', runId).first(knex.raw("diagnostics -> 'psfFwhmPx' as psf"))) as
    { psf: { major: number; minor: number } | null } | undefined;
  const psf = row?.psf;
  return psf && psf.major > 0 && psf.minor > 0 ? psf : null;
}

interface Side {
  id: string;
  x: number | null;
  y: number | null;
  ra: number | null;
  dec: number | null;
  flux: number | null;
}

interface Prepared {
  runId: number;
  against: CrossMatchResultDto['against'];
  result: CrossMatchResult;
  radiusSource: CrossMatchResultDto['radiusSource'];
  ours: CatalogueSource[];
  ourFluxQuantity: 'fluxDensity' | 'flux';
  ourSides: Side[];
  theirSides: Side[];
  /** Their entries as rows of the matched table. */
  theirTableEntries: MatchTableEntry[];
  image: ImageFacts;
  run: Run;
  pixelFallback: boolean;
}

function finiteOrNull(value: number | null | undefined): number | null {
  return value === null || value === undefined || !Number.isFinite(value) ? null : value;
}

async function radiusFor(
  ctx: AppContext,
  run: Run,
  image: ImageFacts,
  mode: 'sky' | 'pixel',
  request: CrossMatchRequest,
): Promise<{ radiusArcsec?: number; radiusPixels?: number; source: Prepared['radiusSource'] }> {
  const pixelArcsec = image.wcs?.celestial
    ? Math.sqrt(Math.abs(image.wcs.pixelScaleArcsec[0] * image.wcs.pixelScaleArcsec[1]))
    : null;
  if (mode === 'sky') {
    if (request.radiusArcsec !== undefined) return { radiusArcsec: request.radiusArcsec, source: 'given' };
    if (image.beam && image.beam.majorArcsec > 0 && image.beam.minorArcsec > 0)
      return { radiusArcsec: defaultMatchRadiusArcsec(image.beam), source: 'beam' };
    const psf = await psfFwhmPx(ctx.knex, run.id);
    if (psf && pixelArcsec) {
      return {
        radiusArcsec: defaultMatchRadiusArcsec({
          majorArcsec: psf.major * pixelArcsec,
          minorArcsec: psf.minor * pixelArcsec,
        }),
        source: 'psf',
      };
    }
    throw unprocessable('The image has no restoring beam to derive a match radius from; give radiusArcsec.');
  }
  if (request.radiusPixels !== undefined) return { radiusPixels: request.radiusPixels, source: 'given' };
  const psf = await psfFwhmPx(ctx.knex, run.id);
  if (psf) {
    return {
      radiusPixels: defaultMatchRadiusArcsec({ majorArcsec: psf.major, minorArcsec: psf.minor }),
      source: 'psf',
    };
  }
  throw unprocessable('The run has no PSF size to derive a pixel match radius from; give radiusPixels.');
}

/** Wraps the matchers' own errors (plain Error with a person's message) as 422. */
function matchOrRefuse(match: () => CrossMatchResult): CrossMatchResult {
  try {
    return match();
  } catch (error) {
    if (error instanceof AppError) throw error;
    throw unprocessable((error as Error).message);
  }
}

const hasSky = (source: CatalogueSource) => source.ra !== null && source.dec !== null;

/** Pixel position on our image of an RA/Dec through its WCS (null outside the projection). */
function toOurPixels(wcs: Wcs | null, ra: number | null, dec: number | null): [number | null, number | null] {
  if (!wcs || ra === null || dec === null) return [null, null];
  const [x, y] = wcs.worldToPixel(ra, dec);
  return [finiteOrNull(x), finiteOrNull(y)];
}

async function prepare(ctx: AppContext, run: Run, request: CrossMatchRequest): Promise<Prepared> {
  requireSucceeded(run, 'This run');
  const image = await imageFacts(ctx.knex, run.imageId);
  const celestialWcs = image.wcs?.celestial ? parseWcs(image.header) : null;
  const ours = await sourcesOf(run.id);
  const perBeam = /\/beam$/i.test((image.unit ?? '').trim());
  const ourFluxQuantity = perBeam && ours.every((s) => s.fluxDensity !== null) ? 'fluxDensity' : 'flux';
  const oursForMatch = ours.map((s) => ({
    ...s,
    flux: ourFluxQuantity === 'fluxDensity' ? s.fluxDensity! : s.flux,
  }));
  const ourSides: Side[] = oursForMatch.map((s) => ({
    id: String(s.id),
    x: s.x,
    y: s.y,
    ra: s.ra,
    dec: s.dec,
    flux: s.flux,
  }));
  const oursHaveSky = ours.every(hasSky);

  if (request.against.kind === 'reference') {
    const loaded = await loadForMatching(run.projectId, request.against.id);
    let catalogue: ReadCatalogue = loaded.catalogue;
    let pixelFallback = false;
    if (catalogue.positions === 'sky' && !oursHaveSky) {
      // Our image has no celestial WCS: read the stored file again for pixel x/y, if it has them.
      try {
        catalogue = readReferenceCatalogue(loaded.originalText(), {
          format: catalogue.format,
          mapping: { flux: catalogue.mapping.flux, id: catalogue.mapping.id },
          positions: 'pixel',
          maxRejectedListed: 0,
        });
        pixelFallback = true;
      } catch (error) {
        if (!(error instanceof ReferenceCatalogueError)) throw error;
        throw unprocessable(
          `Run ${run.id}'s image has no celestial WCS, so its sources have no RA/Dec, and reference catalogue ` +
            `«${loaded.row.name}» gives RA/Dec only (no pixel x/y columns). Match it against a run of an image ` +
            'with a celestial WCS, or upload a catalogue with pixel positions on this image.',
        );
      }
    }
    const mode = catalogue.positions;
    const radius = await radiusFor(ctx, run, image, mode, request);
    const result = matchOrRefuse(() =>
      matchToReference(oursForMatch, catalogue, {
        radiusArcsec: radius.radiusArcsec,
        radiusPixels: radius.radiusPixels,
      }),
    );
    const theirSides: Side[] = catalogue.entries.map((entry) => {
      const [x, y] = mode === 'pixel' ? [entry.x, entry.y] : toOurPixels(celestialWcs, entry.ra, entry.dec);
      return { id: entry.id ?? `row ${entry.row}`, x, y, ra: entry.ra, dec: entry.dec, flux: entry.flux };
    });
    return {
      runId: run.id,
      against: { kind: 'reference', id: loaded.row.id, name: loaded.row.name },
      result,
      radiusSource: radius.source,
      ours,
      ourFluxQuantity,
      ourSides,
      theirSides,
      theirTableEntries: referenceTableEntries(catalogue),
      image,
      run,
      pixelFallback,
    };
  }

  // Against another run of the project.
  const otherRunNotFound = `Run ${request.against.id} not found in this project.`;
  if (request.against.id === run.id)
    throw unprocessable('A run cannot be matched against itself; choose another run.');
  const other = await Run.query().modify('withoutDiagnostics').findById(request.against.id);
  if (!other || other.projectId !== run.projectId) throw notFound(otherRunNotFound);
  requireSucceeded(other, 'The other run');
  const theirs = await sourcesOf(other.id);
  const sameImage = other.imageId === run.imageId;
  const mode = oursHaveSky && theirs.every(hasSky) ? 'sky' : 'pixel';
  if (mode === 'pixel' && !sameImage) {
    throw unprocessable(
      `Run ${other.id} is of another image, and runs of different images can only be matched on the sky, but ` +
        'at least one of the two images has no celestial WCS.',
    );
  }
  const otherImage = sameImage ? image : await imageFacts(ctx.knex, other.imageId);
  const theirFluxQuantity =
    /\/beam$/i.test((otherImage.unit ?? '').trim()) && theirs.every((s) => s.fluxDensity !== null)
      ? 'fluxDensity'
      : 'flux';
  const theirsForMatch = theirs.map((s) => ({
    ...s,
    flux: theirFluxQuantity === 'fluxDensity' ? s.fluxDensity! : s.flux,
  }));
  const radius = await radiusFor(ctx, run, image, mode, request);
  const result = matchOrRefuse(() =>
    matchRuns(oursForMatch, theirsForMatch, {
      radiusArcsec: radius.radiusArcsec,
      radiusPixels: radius.radiusPixels,
    }),
  );
  const theirSides: Side[] = theirsForMatch.map((s) => {
    const [x, y] = sameImage ? [s.x, s.y] : toOurPixels(celestialWcs, s.ra, s.dec);
    return { id: String(s.id), x, y, ra: s.ra, dec: s.dec, flux: s.flux };
  });
  return {
    runId: run.id,
    against: {
      kind: 'run',
      id: other.id,
      name: `Run ${other.id}${sameImage ? '' : ` (${otherImage.name})`}`,
    },
    result,
    radiusSource: radius.source,
    ours,
    ourFluxQuantity,
    ourSides,
    theirSides,
    theirTableEntries: theirsForMatch.map((s) => ({
      id: s.id,
      ra: s.ra,
      dec: s.dec,
      x: s.x,
      y: s.y,
      flux: s.flux,
    })),
    image,
    run,
    pixelFallback: false,
  };
}

/** Pairs expected by chance: N_ours × (their count inside the image / image area) × π r²; null without an area. */
function chanceMatches(prepared: Prepared): number | null {
  const { image, result, theirSides, ours } = prepared;
  const inside = theirSides.filter(
    (s) =>
      s.x !== null &&
      s.y !== null &&
      s.x >= 0.5 &&
      s.x <= image.width + 0.5 &&
      s.y >= 0.5 &&
      s.y <= image.height + 0.5,
  ).length;
  let area: number;
  if (result.mode === 'sky') {
    if (!image.wcs?.celestial) return null;
    area =
      image.width * image.height * Math.abs(image.wcs.pixelScaleArcsec[0] * image.wcs.pixelScaleArcsec[1]);
  } else {
    area = image.width * image.height;
  }
  if (!(area > 0)) return null;
  return (ours.length * inside * Math.PI * result.radius ** 2) / area;
}

function cautions(prepared: Prepared, chance: number | null): string[] {
  const { result, against, pixelFallback } = prepared;
  const out: string[] = [];
  if (pixelFallback)
    out.push(
      "Matched by pixel position: the run's image has no celestial WCS, so the reference's pixel x/y were used.",
    );
  out.push(
    'A pair within the radius is a positional coincidence, not proof of the same object; in crowded fields and ' +
      'for extended sources check pairs by eye. Pairs are assigned one to one, closest first.',
  );
  if (chance !== null && result.pairs.length > 0 && chance >= 0.05 * result.pairs.length) {
    out.push(
      `About ${chance.toPrecision(2)} of the ${result.pairs.length} pairs are expected by chance alone at this radius; ` +
        'a smaller radius gives fewer false pairs.',
    );
  }
  if (against.kind === 'reference' && result.fluxRatio.count > 0) {
    out.push(
      'The reference flux column is compared as given; Skysieve does not know its unit or band. A median ratio ' +
        'far from 1 can be a unit difference (e.g. mJy against Jy) or a different frequency or aperture.',
    );
  }
  const { mean1, mean1Err, mean2, mean2Err } = result.offsets;
  const significant = (mean: number | null, error: number | null) =>
    mean !== null && error !== null && error > 0 && Math.abs(mean) > 3 * error;
  if (significant(mean1, mean1Err) || significant(mean2, mean2Err)) {
    out.push(
      'The mean offset differs from zero by more than three standard errors: the two catalogues may have a ' +
        'systematic astrometric offset.',
    );
  }
  out.push(CATALOGUE_CAUTION);
  return out;
}

/** The match and its summary as the API answers it. */
export async function crossMatch(
  ctx: AppContext,
  run: Run,
  request: CrossMatchRequest,
): Promise<CrossMatchResultDto> {
  const prepared = await prepare(ctx, run, request);
  const { result, ourSides, theirSides, image } = prepared;
  const pairs: MatchedPairDto[] = result.pairs.map((pair) => {
    const a = ourSides[pair.ours]!;
    const b = theirSides[pair.theirs]!;
    return {
      ourId: Number(a.id),
      theirId: b.id,
      separation: pair.separation,
      offset1: pair.offset1,
      offset2: pair.offset2,
      fluxRatio: finiteOrNull(pair.fluxRatio),
      ourFlux: finiteOrNull(a.flux),
      theirFlux: finiteOrNull(b.flux),
      ourX: a.x!,
      ourY: a.y!,
      ourRa: a.ra,
      ourDec: a.dec,
      theirX: b.x,
      theirY: b.y,
      theirRa: b.ra,
      theirDec: b.dec,
    };
  });
  const unmatched = (side: Side): UnmatchedEntry => ({ ...side, flux: finiteOrNull(side.flux) });
  const chance = chanceMatches(prepared);
  const units = fluxUnits(image.unit ?? '');
  return {
    runId: prepared.runId,
    against: prepared.against,
    mode: result.mode,
    unit: result.unit,
    radius: result.radius,
    radiusSource: prepared.radiusSource,
    ourFluxQuantity: prepared.ourFluxQuantity,
    ourFluxUnit: prepared.ourFluxQuantity === 'fluxDensity' ? units.fluxDensity : units.flux,
    counts: {
      ours: ourSides.length,
      theirs: theirSides.length,
      matched: result.pairs.length,
      onlyOurs: result.onlyOurs.length,
      onlyTheirs: result.onlyTheirs.length,
    },
    offsets: result.offsets,
    fluxRatio: result.fluxRatio,
    chanceMatchesExpected: chance,
    pairs,
    onlyOurs: result.onlyOurs.map((i) => unmatched(ourSides[i]!)),
    onlyTheirs: result.onlyTheirs.map((j) => unmatched(theirSides[j]!)),
    cautions: cautions(prepared, chance),
  };
}

/** The matched table (pairs, then ours-only, then theirs-only) in a standard format. */
export async function crossMatchDownload(
  ctx: AppContext,
  run: Run,
  request: CrossMatchRequest,
  format: TableFormat,
): Promise<Download> {
  const prepared = await prepare(ctx, run, request);
  const { image, result } = prepared;
  const provenance = catalogueProvenance(image, run, ctx.version, isoDate(new Date()));
  const units = fluxUnits(image.unit ?? '');
  const ourTableEntries: MatchTableEntry[] = prepared.ourSides.map((s) => ({ ...s, id: Number(s.id) }));
  const table = crossMatchToTable(result, ourTableEntries, prepared.theirTableEntries, provenance, {
    ourFlux: prepared.ourFluxQuantity === 'fluxDensity' ? units.fluxDensity : units.flux,
    theirFlux: '',
  });
  table.title = `Skysieve cross-match of run ${run.id} against ${prepared.against.name}`;
  const base = `skysieve-run-${run.id}-cross-match-${prepared.against.kind}-${prepared.against.id}`;
  return tableDownload(table, base, format);
}
