/**
 * The quick-look PNG of a finished run (GET /api/runs/:id/quicklook.png): loads the chosen plane, the catalogue
 * positions and the beam, and draws them with quicklook-image.ts.
 */
import type { Knex } from 'knex';

import { type QuicklookQuery, SIGNED_QUICKLOOK_PLANES } from '../../shared/quicklook';
import type { RunDiagnostics } from '../../shared/runs';
import { AppError, conflict, notFound } from '../http/app-error';
import { pixelPlane } from '../images/images.service';
import { ViewCache } from '../images/view-cache';
import { Image } from '../models/image';
import type { Run } from '../models/run';
import { bytesToFloat32 } from '../models/run-component';
import {
  encodeQuicklookPng,
  type QuicklookBeam,
  type QuicklookPlane,
  renderQuicklook,
} from './quicklook-image';

/** Used only when neither the fit, the settings nor the image give the beam (a typical sampling of 3 px). */
const FALLBACK_FWHM_PX = 3;

async function loadPlane(knex: Knex, run: Run, image: Image, component: QuicklookQuery['component']) {
  if (component === 'data') {
    const { data, mask } = await pixelPlane(image);
    return { width: image.width, height: image.height, data, mask } satisfies QuicklookPlane;
  }
  const row = (await knex('run_components')
    .where({ runId: run.id, name: component })
    .first('width', 'height', 'data')) as { width: number; height: number; data: Buffer } | undefined;
  if (!row) throw notFound(`Run ${run.id} has no ${component} component.`);
  return { width: row.width, height: row.height, data: bytesToFloat32(row.data) } satisfies QuicklookPlane;
}

/**
 * The beam in pixels: the fit's PSF (its diagnostics), else the PSF given in the settings, else the image's
 * restoring beam over its pixel scale, else FALLBACK_FWHM_PX. Position angle as the run page draws it.
 */
async function beamOf(knex: Knex, run: Run, image: Image): Promise<QuicklookBeam> {
  const stored = (await knex('runs').where('id', run.id).first('diagnostics')) as
    { diagnostics: RunDiagnostics | null } | undefined;
  const psf = run.settings.psf as { fwhmMajor?: number; fwhmMinor?: number; pa?: number } | null | undefined;
  const paDeg = psf?.pa ?? image.beam?.paDeg ?? 0;
  const fitted = stored?.diagnostics?.psfFwhmPx;
  if (fitted) return { majorPx: fitted.major, minorPx: fitted.minor, paDeg };
  if (psf?.fwhmMajor && psf.fwhmMinor) return { majorPx: psf.fwhmMajor, minorPx: psf.fwhmMinor, paDeg };
  const scale = image.wcs ? Math.abs(image.wcs.pixelScaleArcsec[1]) : 0;
  if (image.beam && scale > 0) {
    return { majorPx: image.beam.majorArcsec / scale, minorPx: image.beam.minorArcsec / scale, paDeg };
  }
  return { majorPx: FALLBACK_FWHM_PX, minorPx: FALLBACK_FWHM_PX, paDeg };
}

export interface QuicklookPicture {
  png: Buffer;
  fileName: string;
  /** Names the bytes: a finished run's results never change. */
  etag: string;
}

/** Drawn pictures (32 MiB per process; drawing one takes about a second for a 4096² plane). */
const pictureCache = new ViewCache(32 * 1024 ** 2);

/** The ETag of a run's picture for these parameters (the route answers 304 to it without drawing). */
export const quicklookEtag = (run: Run, query: QuicklookQuery): string =>
  `"quicklook-${run.id}-${run.settingsDigest.slice(0, 16)}-${query.component}-${query.maxSize}-${query.colourMap ?? 'default'}"`;

export async function quicklookPng(knex: Knex, run: Run, query: QuicklookQuery): Promise<QuicklookPicture> {
  if (run.status !== 'succeeded') {
    throw conflict(`Run ${run.id} is ${run.status}; a quick-look picture needs a run that has succeeded.`);
  }
  const etag = quicklookEtag(run, query);
  const fileName = `skysieve-run-${run.id}-${query.component}-quicklook.png`;
  const cached = pictureCache.get(etag);
  if (cached)
    return { png: Buffer.from(cached.buffer, cached.byteOffset, cached.byteLength), fileName, etag };
  const image = await Image.query().findById(run.imageId);
  if (!image) throw notFound('The image of this run no longer exists.');
  const [plane, beam, sources] = await Promise.all([
    loadPlane(knex, run, image, query.component),
    beamOf(knex, run, image),
    knex('run_sources').where('runId', run.id).select('x', 'y') as Promise<{ x: number; y: number }[]>,
  ]);
  if (!plane.data.some((v, i) => Number.isFinite(v) && (!plane.mask || plane.mask[i] === 1))) {
    throw new AppError(
      'unprocessable',
      `The ${query.component} plane of run ${run.id} has no valid pixels, so there is nothing to draw.`,
    );
  }
  const raster = renderQuicklook(plane, sources, beam, {
    maxSize: query.maxSize,
    colourMap: query.colourMap,
    signed: SIGNED_QUICKLOOK_PLANES.includes(query.component),
  });
  const png = await encodeQuicklookPng(raster);
  pictureCache.set(etag, png);
  return { png, fileName, etag };
}
