/**
 * A joint separation's result (engine/joint/separate-joint.ts) in the shape the run store takes
 * (FitThreadResult): image 1's planes with the common-grid sky fields as the run's components, images 2…n's
 * planes beside them, the diagnostics of image 1 (its normalised residuals) with the joint fit's spectrum and
 * trace, and what the run row keeps (scale factors with errors, per-image unit, noise, PSF, the grid).
 */
import type { JointResults } from '../../shared/joint-runs';
import type { RunDiagnostics } from '../../shared/runs';
import type { JointSeparationResult } from '../engine/joint/separate-joint';
import { residualHistogram, thinTrace } from './fit-diagnostics';
import type { FitThreadResult } from './fit-thread';

export function jointThreadResult(result: JointSeparationResult, inputSha256: string[]): FitThreadResult {
  const ref = result.images[0]!;
  const { amplitude, slope, turnover, estimated, binned } = result.spectrum;
  const diagnostics: RunDiagnostics = {
    residualHistogram: residualHistogram(ref.residualNorm),
    spectrum: {
      k: binned.k,
      power: binned.power,
      mapPower: binned.mapPower,
      modes: binned.modes,
      // The fitted law of the diffuse spectrum (server/engine/fit/spectrum.ts, powerLawSpectrum).
      fitted: binned.k.map((k) => amplitude * Math.pow(k * k + turnover * turnover, -slope / 2)),
      amplitude,
      slope,
      turnover,
      estimated,
    },
    convergence: thinTrace(result.trace),
    converged: result.converged,
    iterations: result.iterations,
    evaluations: result.evaluations,
    noise: { sigma: ref.sigma, source: ref.sigmaSource },
    psfFwhmPx: ref.psfFwhmPx,
    beamAreaPx: ref.beamAreaPx,
    compactPrior: result.compactPrior,
  };
  const results: JointResults = {
    grid: {
      width: result.grid.width,
      height: result.grid.height,
      factor: result.grid.factor,
      scaleArcsec: result.grid.scaleArcsec,
    },
    scalePriorWidth: result.scalePriorWidth,
    refinement: result.refinement,
    catalogueImage: result.catalogueImage,
    warnings: result.warnings,
    images: result.images.map((image, i) => ({
      scale: { ...image.scale },
      unit: image.unit,
      unitGain: image.unitGain,
      likelihood: image.likelihood,
      sigma: image.sigma,
      sigmaSource: image.sigmaSource,
      psfFwhmPx: image.psfFwhmPx,
      beamAreaPx: image.beamAreaPx,
      pixelsUsed: image.pixelsUsed,
      pixelsOutside: image.pixelsOutside,
      inputName: image.name,
      inputSha256: inputSha256[i] ?? '',
    })),
  };
  const grid = { width: result.grid.width, height: result.grid.height };
  return {
    width: ref.width,
    height: ref.height,
    settings: result.settings,
    settingsDigest: result.settingsDigest,
    catalogue: result.catalogue,
    planes: {
      diffuse: ref.diffuse,
      diffuseSky: result.diffuseSky,
      compact: ref.compact,
      compactSky: result.compactSky,
      model: ref.model,
      residual: ref.residual,
      residualNorm: ref.residualNorm,
    },
    planeSizes: { diffuseSky: grid, compactSky: grid },
    diagnostics,
    timings: result.timings,
    joint: {
      imagePlanes: result.images.slice(1).map((image, i) => ({
        position: i + 2,
        width: image.width,
        height: image.height,
        planes: {
          diffuse: image.diffuse,
          compact: image.compact,
          model: image.model,
          residual: image.residual,
          residualNorm: image.residualNorm,
        },
      })),
      results,
    },
  };
}

/** Every buffer of the result's planes, for transferring them out of the thread. */
export function resultBuffers(result: FitThreadResult): ArrayBuffer[] {
  const planes = [
    ...Object.values(result.planes),
    ...(result.joint?.imagePlanes.flatMap((image) => Object.values(image.planes)) ?? []),
  ];
  return [...new Set(planes.map((plane) => plane.buffer as ArrayBuffer))];
}
