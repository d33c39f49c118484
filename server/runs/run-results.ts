/**
 * Writing a finished run, exactly once: one transaction locks the run row, checks that it is still running (a
 * second worker that picked up an expired job, or a cancel, may have finished it), charges the result bytes to the
 * image uploader's quota (under their row lock, server/storage/quota.ts), inserts every source row and every
 * component plane (for a joint run also the planes of images 2…n and the scale factors), and marks the run
 * succeeded. Any failure rolls all of it back: no duplicate source rows, no half-written components, no quota
 * drift.
 */
import type { Knex } from 'knex';

import { COMPONENT_NAMES, type RunProgress, type RunProvenance } from '../../shared/runs';
import { float32ToBytes } from '../models/run-component';
import { RunSource } from '../models/run-source';
import { chargeQuota } from '../storage/quota';
import type { FitThreadResult } from './fit-thread';

/** Bytes a stored source row is counted as (16 numeric columns × 8 bytes; a rule of thumb, common practice). */
export const SOURCE_ROW_BYTES = 128;

/** The bytes charged for a result: every plane's float32 bytes plus the source rows. */
export function resultBytes(result: Pick<FitThreadResult, 'planes' | 'catalogue' | 'joint'>): number {
  let bytes = 0;
  for (const name of COMPONENT_NAMES) bytes += result.planes[name].byteLength;
  for (const image of result.joint?.imagePlanes ?? [])
    for (const plane of Object.values(image.planes)) bytes += plane.byteLength;
  return bytes + result.catalogue.length * SOURCE_ROW_BYTES;
}

/**
 * The progress a finished run ends on when none was written while it ran, as a JSON parameter: SQL NULL (not
 * JSON null) when the fit left no trace.
 */
function finalProgressJson(result: FitThreadResult): string | null {
  const last = result.diagnostics.convergence.at(-1);
  if (!last) return null;
  const progress: RunProgress = {
    phase: 'catalogue',
    stage: last.stage,
    iteration: last.iteration,
    objective: last.objective,
    gradNorm: last.gradNorm,
    fraction: 1,
  };
  return JSON.stringify(progress);
}

export type StoreOutcome = 'stored' | 'already-finished' | 'cancelled';

export async function storeRunResults(
  knex: Knex,
  runId: number,
  result: FitThreadResult,
  provenance: RunProvenance,
  chargeTo: number | null,
): Promise<StoreOutcome> {
  return knex.transaction(async (trx) => {
    const run = (await trx('runs').where('id', runId).forUpdate().first('status', 'cancelRequested')) as
      { status: string; cancelRequested: boolean } | undefined;
    if (!run || run.status !== 'running') return 'already-finished';
    if (run.cancelRequested) {
      await trx('runs')
        .where('id', runId)
        .update({ status: 'cancelled', finishedAt: trx.fn.now(), updatedAt: trx.fn.now() });
      return 'cancelled';
    }
    const bytes = resultBytes(result);
    if (chargeTo !== null) await chargeQuota(trx, chargeTo, bytes);
    const rows = result.catalogue.map((source) => RunSource.rowOf(runId, source));
    // 17 columns per row: batches far below PostgreSQL's 65 535 bind parameters.
    for (let i = 0; i < rows.length; i += 1000) await trx('run_sources').insert(rows.slice(i, i + 1000));
    for (const name of COMPONENT_NAMES) {
      const data = float32ToBytes(result.planes[name]);
      const size = result.planeSizes?.[name] ?? { width: result.width, height: result.height };
      await trx('run_components').insert({
        runId,
        name,
        width: size.width,
        height: size.height,
        data,
        byteSize: data.byteLength,
      });
    }
    // A joint run: the planes of images 2…n (image 1's are the run's own components above).
    for (const image of result.joint?.imagePlanes ?? []) {
      for (const [name, plane] of Object.entries(image.planes)) {
        const data = float32ToBytes(plane);
        await trx('run_image_components').insert({
          runId,
          position: image.position,
          name,
          width: image.width,
          height: image.height,
          data,
          byteSize: data.byteLength,
        });
      }
    }
    await trx('runs')
      .where('id', runId)
      .update({
        status: 'succeeded',
        settings: JSON.stringify(result.settings),
        settingsDigest: result.settingsDigest,
        sourceCount: result.catalogue.length,
        phasesMs: JSON.stringify(result.timings),
        provenance: JSON.stringify(provenance),
        diagnostics: JSON.stringify(result.diagnostics),
        jointResults: result.joint ? JSON.stringify(result.joint.results) : null,
        resultBytes: bytes,
        chargedUserId: chargeTo,
        // A fit shorter than the progress write interval may have left no progress at all: end on the
        // trace's last point then, so a finished run always shows its final iteration and objective.
        progress: trx.raw("coalesce(jsonb_set(progress, '{fraction}', '1'), ?::jsonb)", [
          finalProgressJson(result),
        ]),
        errorMessage: null,
        finishedAt: trx.fn.now(),
        updatedAt: trx.fn.now(),
      });
    return 'stored';
  });
}
