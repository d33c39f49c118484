/**
 * Comparisons: save 2–4 finished runs of one image side by side, read them with the settings in which they
 * differ, rename or re-point them, delete them; and the two derived results a reviewer asks for: the difference
 * of two runs' diffuse fields (a float32 view like the component views) and the cross-match of two runs'
 * catalogues (server/catalogue/match-reference.ts matchRuns).
 */
import type { Knex } from 'knex';

import type { CatalogueSource } from '../../shared/catalogue';
import {
  type ComparisonDetail,
  type ComparisonSummary,
  type CreateComparisonOutput,
  type CrossMatchQuery,
  type DifferenceQuery,
  type MatchedSource,
  type RunCrossMatch,
  type UpdateComparisonRequest,
  runSelectionProblem,
  settingsDifference,
} from '../../shared/comparisons';
import type { BeamSummary, WcsSummary } from '../../shared/images';
import type { RunDiagnostics } from '../../shared/runs';
import { CATALOGUE_CAUTION } from '../catalogue/catalogue-table';
import { matchRuns } from '../catalogue/match-reference';
import { AppError, forbidden } from '../http/app-error';
import { isoDate } from '../models/base-model';
import { Comparison } from '../models/comparison';
import { Run } from '../models/run';
import { RunSource } from '../models/run-source';
import { hasRole } from '../projects/project-access';
import { loadPlane, type PlaneView, planeView, toRunSummary } from '../runs/runs.service';
import type { ProjectAccess } from '../types';

const unprocessable = (message: string, details?: unknown) => new AppError('unprocessable', message, details);

const STATUS_WORDS: Record<Run['status'], string> = {
  queued: 'is still queued',
  running: 'is still running',
  succeeded: 'has succeeded',
  failed: 'failed',
  cancelled: 'was cancelled',
};

/** The runs named, checked: 2–4 distinct, all of this project, of one image, all succeeded (422 otherwise). */
async function checkedRuns(projectId: number, runIds: readonly number[], trx: Knex.Transaction) {
  const problem = runSelectionProblem(runIds);
  if (problem) throw unprocessable(problem);
  const found = await Run.query(trx).modify('withoutDiagnostics').whereIn('id', runIds);
  const byId = new Map(found.map((run) => [run.id, run]));
  // A run of another project and a run that does not exist get the same answer: nothing leaks.
  const outside = runIds.filter((id) => byId.get(id)?.projectId !== projectId);
  if (outside.length > 0) {
    throw unprocessable(
      `${outside.length === 1 ? `Run ${outside[0]} is` : `Runs ${outside.join(', ')} are`} not in this project.`,
    );
  }
  const runs = runIds.map((id) => byId.get(id)!);
  const imageIds = [...new Set(runs.map((run) => run.imageId))];
  if (imageIds.length > 1) {
    const names = (await trx('images').whereIn('id', imageIds).select('id', 'name')) as {
      id: number;
      name: string;
    }[];
    const nameOf = new Map(names.map((row) => [row.id, row.name]));
    const listing = runs.map((run) => `run ${run.id}: ${nameOf.get(run.imageId) ?? `image ${run.imageId}`}`);
    throw unprocessable(
      `Only runs of the same image can be compared; these runs belong to ${imageIds.length} images (${listing.join('; ')}).`,
    );
  }
  const unfinished = runs.find((run) => run.status !== 'succeeded');
  if (unfinished) {
    throw unprocessable(
      `Run ${unfinished.id} ${STATUS_WORDS[unfinished.status]}; only runs that have succeeded can be compared.`,
    );
  }
  return runs;
}

async function summaries(knex: Knex, comparisons: Comparison[]): Promise<ComparisonSummary[]> {
  if (comparisons.length === 0) return [];
  const ids = comparisons.map((c) => c.id);
  const [members, images, users] = await Promise.all([
    knex('comparison_runs').whereIn('comparisonId', ids).orderBy(['comparisonId', 'position']) as Promise<
      { comparisonId: number; runId: number }[]
    >,
    knex('images')
      .whereIn('id', [...new Set(comparisons.map((c) => c.imageId))])
      .select('id', 'name') as Promise<{ id: number; name: string }[]>,
    knex('users')
      .whereIn(
        'id',
        comparisons.flatMap((c) => (c.createdBy === null ? [] : [c.createdBy])),
      )
      .select('id', 'displayName') as Promise<{ id: number; displayName: string }[]>,
  ]);
  const imageName = new Map(images.map((row) => [row.id, row.name]));
  const userName = new Map(users.map((row) => [row.id, row.displayName]));
  return comparisons.map((c) => ({
    id: c.id,
    projectId: c.projectId,
    imageId: c.imageId,
    imageName: imageName.get(c.imageId) ?? '',
    name: c.name,
    component: c.component,
    runIds: members.filter((m) => m.comparisonId === c.id).map((m) => m.runId),
    runCount: c.runCount,
    createdBy: c.createdBy,
    createdByName: c.createdBy === null ? null : (userName.get(c.createdBy) ?? null),
    createdAt: isoDate(c.createdAt),
    updatedAt: isoDate(c.updatedAt),
  }));
}

export async function createComparison(
  user: Express.User,
  projectId: number,
  body: CreateComparisonOutput,
): Promise<Comparison> {
  return Comparison.transaction(async (trx) => {
    const runs = await checkedRuns(projectId, body.runIds, trx);
    const comparison = await Comparison.query(trx).insertAndFetch({
      projectId,
      imageId: runs[0]!.imageId,
      name: body.name,
      component: body.component,
      runCount: runs.length,
      createdBy: user.id,
    });
    await trx('comparison_runs').insert(
      runs.map((run, position) => ({ comparisonId: comparison.id, runId: run.id, position })),
    );
    return comparison;
  });
}

export async function listComparisons(knex: Knex, projectId: number): Promise<ComparisonSummary[]> {
  const comparisons = await Comparison.query().where('projectId', projectId).orderBy('id', 'desc');
  return summaries(knex, comparisons);
}

async function runsOf(comparison: Comparison): Promise<Run[]> {
  return comparison.$relatedQuery('runs') as unknown as Promise<Run[]>;
}

export async function comparisonDetail(knex: Knex, comparison: Comparison): Promise<ComparisonDetail> {
  const [summary] = await summaries(knex, [comparison]);
  const runs = await runsOf(comparison);
  const missing = comparison.runCount - runs.length;
  return {
    ...summary!,
    runs: runs.map((run) => ({
      ...toRunSummary(run),
      settings: run.settings,
      settingsDigest: run.settingsDigest,
    })),
    settingsDifference: settingsDifference(runs.map((run) => run.settings)),
    note:
      missing > 0
        ? `${missing === 1 ? 'One run' : `${missing} runs`} of this comparison ${missing === 1 ? 'was' : 'were'} deleted since it was saved.`
        : null,
  };
}

export async function updateComparison(
  knex: Knex,
  comparison: Comparison,
  body: UpdateComparisonRequest,
): Promise<ComparisonSummary> {
  const patch: Partial<Pick<Comparison, 'name' | 'component'>> = {};
  if (body.name !== undefined) patch.name = body.name;
  if (body.component !== undefined) patch.component = body.component;
  const updated = await comparison.$query().patchAndFetch(patch);
  return (await summaries(knex, [updated]))[0]!;
}

/** Project editors, owners and admins may delete any comparison; its creator may delete their own. */
export async function deleteComparison(
  user: Express.User,
  access: ProjectAccess,
  comparison: Comparison,
): Promise<void> {
  if (!hasRole(user, access, 'editor') && comparison.createdBy !== user.id) {
    throw forbidden('Only project owners and editors, or the person who saved it, can delete a comparison.');
  }
  await Comparison.query().deleteById(comparison.id);
}

/** Runs a and b of the comparison (422 when either is not one of its runs). */
export async function pairOf(comparison: Comparison, a: number, b: number): Promise<[Run, Run]> {
  const runs = await runsOf(comparison);
  const pick = (id: number) => {
    const run = runs.find((candidate) => candidate.id === id);
    if (!run) {
      throw unprocessable(
        `Run ${id} is not part of this comparison (its runs: ${runs.map((r) => r.id).join(', ')}).`,
      );
    }
    return run;
  };
  return [pick(a), pick(b)];
}

/** diffuse(a) − diffuse(b) at full size, then block-averaged like a component view. */
export async function diffuseDifference(
  knex: Knex,
  [runA, runB]: [Run, Run],
  maxSize: DifferenceQuery['maxSize'],
): Promise<PlaneView> {
  const [first, second] = await Promise.all([
    loadPlane(knex, runA, 'diffuse'),
    loadPlane(knex, runB, 'diffuse'),
  ]);
  if (first.width !== second.width || first.height !== second.height) {
    throw unprocessable(
      `The diffuse planes differ in size (${first.width} × ${first.height} and ${second.width} × ${second.height}).`,
    );
  }
  const data = new Float32Array(first.data.length);
  for (let i = 0; i < data.length; i++) data[i] = first.data[i]! - second.data[i]!;
  return planeView({ width: first.width, height: first.height, data }, maxSize);
}

/** Half the geometric-mean FWHM, the same rule as defaultMatchRadiusArcsec (common practice, no source). */
const halfGeometricMean = (major: number, minor: number) => 0.5 * Math.sqrt(major * minor);

async function sourcesOf(run: Run): Promise<CatalogueSource[]> {
  const rows = await RunSource.query().where('runId', run.id).orderBy('sourceId');
  return rows.map((row) => row.toCatalogueSource());
}

export async function crossMatchRuns(
  knex: Knex,
  comparison: Comparison,
  query: CrossMatchQuery,
): Promise<RunCrossMatch> {
  const [runA, runB] = await pairOf(comparison, query.a, query.b);
  const [sourcesA, sourcesB, image, diagnostics] = await Promise.all([
    sourcesOf(runA),
    sourcesOf(runB),
    knex('images').where('id', comparison.imageId).first('beam', 'wcs', 'unit') as Promise<
      { beam: BeamSummary | null; wcs: WcsSummary | null; unit: string | null } | undefined
    >,
    knex('runs').where('id', runA.id).first('diagnostics') as Promise<
      { diagnostics: RunDiagnostics | null } | undefined
    >,
  ]);
  const all = [...sourcesA, ...sourcesB];
  const sky = all.every((s) => s.ra !== null && s.dec !== null);
  const psf = diagnostics?.diagnostics?.psfFwhmPx ?? null;
  const pixelScale = image?.wcs ? Math.abs(image.wcs.pixelScaleArcsec[1]) : NaN;

  let radiusSource: RunCrossMatch['radiusSource'] = 'given';
  let radiusArcsec = query.radiusArcsec;
  let radiusPixels = query.radiusPixels;
  if (sky && radiusArcsec === undefined) {
    if (image?.beam && image.beam.majorArcsec > 0 && image.beam.minorArcsec > 0) {
      radiusArcsec = halfGeometricMean(image.beam.majorArcsec, image.beam.minorArcsec);
      radiusSource = 'beam';
    } else if (psf && pixelScale > 0) {
      radiusArcsec = halfGeometricMean(psf.major, psf.minor) * pixelScale;
      radiusSource = 'psf';
    }
  }
  if (!sky && radiusPixels === undefined && psf) {
    radiusPixels = halfGeometricMean(psf.major, psf.minor);
    radiusSource = 'psf';
  }
  if ((sky && radiusArcsec === undefined) || (!sky && radiusPixels === undefined)) {
    throw unprocessable(
      sky
        ? 'The image has no beam to derive a match radius from; give radiusArcsec.'
        : 'The runs have no PSF size to derive a match radius from; give radiusPixels.',
    );
  }

  const fluxKind: RunCrossMatch['fluxKind'] = all.every(
    (s) => s.fluxDensity !== null && s.fluxDensityErr !== null,
  )
    ? 'fluxDensity'
    : 'flux';
  const compared = (source: CatalogueSource): MatchedSource => ({
    id: source.id,
    x: source.x,
    y: source.y,
    ra: source.ra,
    dec: source.dec,
    flux: fluxKind === 'fluxDensity' ? source.fluxDensity! : source.flux,
    fluxErr: fluxKind === 'fluxDensity' ? source.fluxDensityErr! : source.fluxErr,
    snr: source.snr,
  });
  const entriesA = sourcesA.map(compared);
  const entriesB = sourcesB.map(compared);
  const asCatalogue = (entries: MatchedSource[], originals: CatalogueSource[]) =>
    originals.map((source, i) => ({ ...source, flux: entries[i]!.flux }));
  let result;
  try {
    result = matchRuns(asCatalogue(entriesA, sourcesA), asCatalogue(entriesB, sourcesB), {
      radiusArcsec,
      radiusPixels,
    });
  } catch (error) {
    throw unprocessable(error instanceof Error ? error.message : String(error));
  }
  const unit = image?.unit ?? null;
  return {
    a: runA.id,
    b: runB.id,
    mode: result.mode,
    unit: result.unit,
    radius: result.radius,
    radiusSource,
    fluxKind,
    fluxUnit:
      fluxKind === 'fluxDensity' ? (unit?.replace(/\/beam$/i, '') ?? null) : unit ? `${unit} · pixel` : null,
    counts: {
      a: sourcesA.length,
      b: sourcesB.length,
      matched: result.pairs.length,
      onlyA: result.onlyOurs.length,
      onlyB: result.onlyTheirs.length,
    },
    pairs: result.pairs.map((pair) => ({
      a: entriesA[pair.ours]!,
      b: entriesB[pair.theirs]!,
      separation: pair.separation,
      offset1: pair.offset1,
      offset2: pair.offset2,
      fluxRatio: pair.fluxRatio,
    })),
    onlyA: result.onlyOurs.map((i) => entriesA[i]!),
    onlyB: result.onlyTheirs.map((j) => entriesB[j]!),
    offsets: result.offsets,
    fluxRatio: result.fluxRatio,
    caution:
      `Both catalogues come from fits of the same data, so their errors are not independent: agreement within ` +
      `the errors is expected and says little about accuracy. Sources only in one run are often near the ` +
      `detection threshold or blended. ${CATALOGUE_CAUTION}`,
  };
}
