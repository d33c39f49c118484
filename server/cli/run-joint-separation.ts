/**
 * The command line's joint fit of several images of one field (engine/joint/separate-joint.ts): read every
 * image, fit them together, write into one folder
 *   catalogue.csv (and the other formats asked for): the joint catalogue, positions in image 1's pixels and RA/Dec;
 *   common_diffuse_sky.fits, common_compact_sky.fits: the two fields on the common grid (its own WCS);
 *   imageN_diffuse.fits, imageN_compact.fits, imageN_model.fits, imageN_residual.fits,
 *   imageN_residual_norm.fits: the components as they appear in image N, on its grid with its header;
 *   run.json: provenance of every input (file, SHA-256, size, unit, beam/PSF, noise, pixels used), the
 *   flux-scale factors with their errors, the grid, settings, convergence and warnings.
 * Everything is computed in memory first, then each file is written under a temporary name and renamed.
 */
import { createHash } from 'node:crypto';
import { mkdir, readFile } from 'node:fs/promises';
import { basename } from 'node:path';
import type { CatalogueProvenance } from '../catalogue/catalogue-table';
import { writeCatalogueFiles, type CatalogueFormat } from '../catalogue/write-catalogue-files';
import { writeAtomically } from './run-separation';
import { readImageAsync, type SkyImage } from '../engine/io/read-image';
import { writeFits } from '../engine/io/write-fits';
import { commonGridDropsSip, commonGridHeader } from '../engine/joint/common-grid';
import {
  separateJoint,
  type JointSeparationResult,
  type PerImageSettings,
} from '../engine/joint/separate-joint';

export interface JointRunRequest {
  imagePaths: string[];
  outDir: string;
  settings: Record<string, unknown>;
  perImage: PerImageSettings[];
  scalePriorWidth?: number;
  plane?: number;
  formats: CatalogueFormat[];
  softwareVersion: string;
  onProgress?: (p: {
    stage: string;
    iteration: number;
    objective: number;
    gradNorm: number;
    evaluations: number;
  }) => void;
  signal?: AbortSignal;
}

export interface JointRunSummary {
  result: JointSeparationResult;
  files: string[];
  wallTimeSeconds: number;
}

async function readOne(path: string, plane: number | undefined) {
  const bytes = await readFile(path).catch((error: NodeJS.ErrnoException) => {
    throw new Error(
      error.code === 'ENOENT' ? `Cannot read ${path}: no such file` : `Cannot read ${path}: ${error.message}`,
    );
  });
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  const image = await readImageAsync(new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength), {
    fileName: basename(path),
    plane,
  });
  return { path, sha256, image };
}

export async function runJointSeparation(request: JointRunRequest): Promise<JointRunSummary> {
  const started = performance.now();
  const inputs: Awaited<ReturnType<typeof readOne>>[] = [];
  for (const path of request.imagePaths) inputs.push(await readOne(path, request.plane));
  const result = await separateJoint(
    inputs.map(({ path, image }) => ({
      name: basename(path),
      width: image.width,
      height: image.height,
      data: image.data,
      mask: image.mask,
      wcs: image.wcs,
      beam: image.beam,
      unit: image.unit,
    })),
    request.settings,
    {
      perImage: request.perImage,
      scalePriorWidth: request.scalePriorWidth,
      onProgress: request.onProgress,
      signal: request.signal,
    },
  );
  const wallTimeSeconds = (performance.now() - started) / 1000;

  const reference = inputs[0]!.image;
  const fitsOptions = (header: SkyImage['header'], unit: string | undefined, what: string) => ({
    header,
    unit,
    softwareVersion: request.softwareVersion,
    settingsDigest: result.settingsDigest,
    cards: [{ keyword: 'HISTORY', comment: `Skysieve joint fit: ${what}` }],
  });
  const gridHeader = commonGridHeader(result.gridInfo, reference.wcs!, reference.header);
  if (commonGridDropsSip(result.gridInfo, reference.header)) {
    result.warnings.push(
      'The common-grid FITS files leave out the reference image’s SIP distortion (their WCS is the linear part only)',
    );
  }
  const contents: [string, Uint8Array | string][] = [
    [
      'common_diffuse_sky.fits',
      writeFits(
        { width: result.grid.width, height: result.grid.height, data: result.diffuseSky },
        fitsOptions(gridHeader, reference.unit ?? undefined, 'diffuse field on the common grid'),
      ),
    ],
    [
      'common_compact_sky.fits',
      writeFits(
        { width: result.grid.width, height: result.grid.height, data: result.compactSky },
        fitsOptions(gridHeader, reference.unit ?? undefined, 'compact field on the common grid'),
      ),
    ],
  ];
  result.images.forEach((r, i) => {
    const { image, path } = inputs[i]!;
    const parts: [string, Float32Array, boolean][] = [
      ['diffuse', r.diffuse, false],
      ['compact', r.compact, false],
      ['model', r.model, false],
      ['residual', r.residual, false],
      ['residual_norm', r.residualNorm, true],
    ];
    for (const [part, data, normalised] of parts) {
      contents.push([
        `image${i + 1}_${part}.fits`,
        writeFits(
          { width: r.width, height: r.height, data },
          fitsOptions(
            image.header,
            normalised ? '' : (image.unit ?? undefined),
            `${part} of ${basename(path)}`,
          ),
        ),
      ]);
    }
  });
  contents.push([
    'run.json',
    `${JSON.stringify(runRecord(request, inputs, result, wallTimeSeconds), null, 2)}\n`,
  ]);

  await mkdir(request.outDir, { recursive: true });
  const files = await writeAtomically(request.outDir, contents);
  const r0 = result.images[0]!;
  const beam = reference.beam
    ? {
        majorArcsec: reference.beam.majorDeg * 3600,
        minorArcsec: reference.beam.minorDeg * 3600,
        positionAngleDeg: reference.beam.paDeg,
      }
    : null;
  const provenance: CatalogueProvenance = {
    imageName: `${basename(request.imagePaths[0]!)} (joint fit with ${request.imagePaths
      .slice(1)
      .map((p) => basename(p))
      .join(', ')})`,
    imageSha256: inputs[0]!.sha256,
    imageUnit: r0.unit,
    beam,
    settingsDigest: result.settingsDigest,
    softwareVersion: request.softwareVersion,
    createdAt: new Date().toISOString(),
  };
  files.push(...(await writeCatalogueFiles(request.outDir, request.formats, result.catalogue, provenance)));
  return { result, files, wallTimeSeconds };
}

function runRecord(
  request: JointRunRequest,
  inputs: { path: string; sha256: string; image: SkyImage }[],
  result: JointSeparationResult,
  wallTimeSeconds: number,
) {
  return {
    software: { name: 'Skysieve', version: request.softwareVersion },
    kind: 'joint',
    inputs: inputs.map(({ path, sha256, image }, i) => {
      const r = result.images[i]!;
      return {
        index: i + 1,
        role: i === 0 ? 'reference' : 'additional',
        file: basename(path),
        sha256,
        format: image.format,
        width: image.width,
        height: image.height,
        plane: image.plane,
        unit: r.unit,
        unitGain: r.unitGain,
        beam: image.beam,
        psf: {
          ...(r.psf.kind === 'gaussian' ? r.psf : { kind: r.psf.kind }),
          fwhmPx: r.psfFwhmPx,
          beamAreaPx: r.beamAreaPx,
        },
        noise: { likelihood: r.likelihood, sigma: r.sigma, source: r.sigmaSource },
        pixelsUsed: r.pixelsUsed,
        pixelsOutsideReference: r.pixelsOutside,
        fluxScale: r.scale,
        settings: request.perImage[i] ?? {},
        warnings: image.warnings,
      };
    }),
    commonGrid: result.grid,
    fluxScalePriorWidth: result.scalePriorWidth,
    catalogue: {
      sources: result.catalogue.length,
      refinedOn: result.refinement,
      refinedImage: result.catalogueImage + 1,
      positionsIn: `image 1 (${basename(request.imagePaths[0]!)}) pixels, FITS 1-based`,
    },
    seedsFrom: `image ${result.sharpestImage + 1} (the sharpest)`,
    settings: result.settings,
    settingsDigest: result.settingsDigest,
    spectrum: {
      amplitude: result.spectrum.amplitude,
      slope: result.spectrum.slope,
      turnover: result.spectrum.turnover,
      estimated: result.spectrum.estimated,
    },
    compactPrior: result.compactPrior,
    iterations: result.iterations,
    evaluations: result.evaluations,
    finalObjective: result.objective,
    converged: result.converged,
    seedsPerRound: result.seedsPerRound,
    warnings: result.warnings,
    wallTimeSeconds,
    engineTimingsMs: result.timings,
    createdAt: new Date().toISOString(),
  };
}
