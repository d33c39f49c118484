/**
 * The command line's work, apart from argument parsing (separate.ts): read one image, run the separation with no
 * server or database, and write the components, residuals, catalogue and run record into a folder.
 *
 * Everything is computed in memory first; each file is then written under a temporary name and renamed into place,
 * so a failure leaves no half-written file (the catalogue writer does the same for its files).
 * On request also quicklook.png: the input image with the catalogue's sources marked by beam ellipses.
 */
import { createHash } from 'node:crypto';
import { readFile, mkdir, rename, rm, writeFile } from 'node:fs/promises';
import { basename, join } from 'node:path';
import type { CatalogueProvenance } from '../catalogue/catalogue-table';
import { writeCatalogueFiles, type CatalogueFormat } from '../catalogue/write-catalogue-files';
import { readImageAsync, type SkyImage } from '../engine/io/read-image';
import { writeFits } from '../engine/io/write-fits';
import { separate, type SeparationProgress, type SeparationResult } from '../engine/separate';
import { encodeQuicklookPng, renderQuicklook } from '../runs/quicklook-image';

export interface SeparationRunRequest {
  imagePath: string;
  outDir: string;
  /** Settings as the separation settings schema takes them (shared/separation-settings.ts). */
  settings: Record<string, unknown>;
  plane?: number;
  /** Catalogue formats; may be empty when only the quick-look picture is asked for. */
  formats: CatalogueFormat[];
  /** Also write quicklook.png. @default false */
  quicklook?: boolean;
  softwareVersion: string;
  onProgress?: (progress: SeparationProgress) => void;
  signal?: AbortSignal;
}

export interface SeparationRunSummary {
  result: SeparationResult;
  files: string[];
  wallTimeSeconds: number;
}

/** The image components written as FITS, with the input's WCS and beam cards. */
const COMPONENT_FILES: { file: string; pick: (r: SeparationResult) => Float32Array; normalised?: boolean }[] =
  [
    { file: 'diffuse.fits', pick: (r) => r.diffuse },
    { file: 'diffuse_sky.fits', pick: (r) => r.diffuseSky },
    { file: 'compact.fits', pick: (r) => r.compact },
    { file: 'model.fits', pick: (r) => r.model },
    { file: 'residual.fits', pick: (r) => r.residual },
    { file: 'residual_norm.fits', pick: (r) => r.residualNorm, normalised: true },
  ];

export async function runSeparation(request: SeparationRunRequest): Promise<SeparationRunSummary> {
  const started = performance.now();
  const bytes = await readFile(request.imagePath).catch((error: NodeJS.ErrnoException) => {
    throw new Error(
      error.code === 'ENOENT'
        ? `Cannot read ${request.imagePath}: no such file`
        : `Cannot read ${request.imagePath}: ${error.message}`,
    );
  });
  const imageSha256 = createHash('sha256').update(bytes).digest('hex');
  const image = await readImageAsync(new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength), {
    fileName: basename(request.imagePath),
    plane: request.plane,
  });
  const result = await separate(
    {
      width: image.width,
      height: image.height,
      data: image.data,
      mask: image.mask,
      wcs: image.wcs,
      beam: image.beam,
      unit: image.unit,
    },
    request.settings,
    { onProgress: request.onProgress, signal: request.signal },
  );
  const wallTimeSeconds = (performance.now() - started) / 1000;

  const contents: [string, Uint8Array | string][] = COMPONENT_FILES.map(({ file, pick, normalised }) => [
    file,
    writeFits(
      { width: result.width, height: result.height, data: pick(result) },
      {
        header: image.header,
        // (data − model)/σ has no unit; every other component keeps the image's.
        unit: normalised ? '' : (image.unit ?? undefined),
        softwareVersion: request.softwareVersion,
        settingsDigest: result.settingsDigest,
        cards: [
          {
            keyword: 'HISTORY',
            comment: `Skysieve ${file.replace('.fits', '')} of ${basename(request.imagePath)}`,
          },
        ],
      },
    ),
  ]);
  contents.push([
    'run.json',
    `${JSON.stringify(runRecord(request, image, imageSha256, result, wallTimeSeconds), null, 2)}\n`,
  ]);

  if (request.quicklook) {
    const raster = renderQuicklook(image, result.catalogue, {
      majorPx: result.psfFwhmPx.major,
      minorPx: result.psfFwhmPx.minor,
      paDeg: result.settings.psf?.pa ?? image.beam?.paDeg ?? 0,
    });
    contents.push(['quicklook.png', await encodeQuicklookPng(raster)]);
  }

  await mkdir(request.outDir, { recursive: true });
  const files = await writeAtomically(request.outDir, contents);
  if (request.formats.length > 0) {
    files.push(
      ...(await writeCatalogueFiles(
        request.outDir,
        request.formats,
        result.catalogue,
        provenance(request, image, imageSha256, result),
      )),
    );
  }
  return { result, files, wallTimeSeconds };
}

/** Writes every file under a temporary name, then renames them all; on an error removes the partial files. */
export async function writeAtomically(
  dir: string,
  contents: [string, Uint8Array | string][],
): Promise<string[]> {
  const partials = contents.map(([name]) => join(dir, `${name}.partial-${process.pid}`));
  try {
    for (const [index, [, content]] of contents.entries()) await writeFile(partials[index]!, content);
    const written: string[] = [];
    for (const [index, [name]] of contents.entries()) {
      await rename(partials[index]!, join(dir, name));
      written.push(join(dir, name));
    }
    return written;
  } catch (error) {
    await Promise.all(partials.map((path) => rm(path, { force: true })));
    throw error;
  }
}

function beamArcsec(image: SkyImage, result: SeparationResult): CatalogueProvenance['beam'] {
  if (image.beam) {
    return {
      majorArcsec: image.beam.majorDeg * 3600,
      minorArcsec: image.beam.minorDeg * 3600,
      positionAngleDeg: image.beam.paDeg,
    };
  }
  if (!image.wcs?.isCelestial) return null;
  const [sx] = image.wcs.pixelScaleDeg();
  return {
    majorArcsec: result.psfFwhmPx.major * sx * 3600,
    minorArcsec: result.psfFwhmPx.minor * sx * 3600,
    positionAngleDeg: result.settings.psf?.pa ?? 0,
  };
}

function provenance(
  request: SeparationRunRequest,
  image: SkyImage,
  imageSha256: string,
  result: SeparationResult,
): CatalogueProvenance {
  return {
    imageName: basename(request.imagePath),
    imageSha256,
    imageUnit: image.unit ?? '',
    beam: beamArcsec(image, result),
    settingsDigest: result.settingsDigest,
    softwareVersion: request.softwareVersion,
    createdAt: new Date().toISOString(),
  };
}

/** run.json: everything needed to know how the outputs were made. */
function runRecord(
  request: SeparationRunRequest,
  image: SkyImage,
  imageSha256: string,
  result: SeparationResult,
  wallTimeSeconds: number,
) {
  return {
    software: { name: 'Skysieve', version: request.softwareVersion },
    input: {
      file: basename(request.imagePath),
      sha256: imageSha256,
      format: image.format,
      width: image.width,
      height: image.height,
      plane: image.plane,
      unit: image.unit,
      warnings: image.warnings,
    },
    settings: result.settings,
    settingsDigest: result.settingsDigest,
    noise: { sigma: result.sigma, source: result.sigmaSource, likelihood: result.settings.likelihood },
    psf: {
      ...(result.psf.kind === 'gaussian' ? result.psf : { kind: result.psf.kind }),
      fwhmPx: result.psfFwhmPx,
      beamAreaPx: result.beamAreaPx,
    },
    spectrum: {
      amplitude: result.spectrum.amplitude,
      slope: result.spectrum.slope,
      turnover: result.spectrum.turnover,
      estimated: result.spectrum.estimated,
    },
    compactPrior: result.compactPrior,
    paddedSize: result.paddedSize,
    sources: result.catalogue.length,
    iterations: result.iterations,
    evaluations: result.evaluations,
    coarseStart: result.coarseStart,
    finalObjective: result.objective,
    converged: result.converged,
    seedsPerRound: result.seedsPerRound,
    wallTimeSeconds,
    engineTimingsMs: result.timings,
    createdAt: new Date().toISOString(),
  };
}
