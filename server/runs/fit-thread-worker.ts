/**
 * Inside the fit thread: rebuild the image (pixels, mask, WCS from the header cards, beam, unit), run the
 * separation, post throttled progress, and post the result with its planes transferred (not copied).
 * Cancel: the parent sets a shared flag; the fit's progress callback (called every iteration, inside the
 * synchronous fit loop, where no message could be received) sees it and aborts the AbortSignal.
 */
import { parentPort, workerData } from 'node:worker_threads';

import { separateJoint } from '../engine/joint/separate-joint';
import { separate, type SeparationProgress } from '../engine/separate';
import { parseWcs } from '../engine/wcs/wcs';
import { buildDiagnostics, progressEstimator } from './fit-diagnostics';
import type { FitThreadData, FitThreadInput, FitThreadMessage, FitThreadResult } from './fit-thread';
import { jointThreadResult, resultBuffers } from './joint-thread-result';

const data = workerData as FitThreadData;
const port = parentPort;
if (!port) throw new Error('fit-thread-worker must run in a worker thread.');

const post = (message: FitThreadMessage, transfer: ArrayBuffer[] = []) => port.postMessage(message, transfer);

async function main(): Promise<void> {
  const cancelFlag = new Int32Array(data.cancelFlag);
  const controller = new AbortController();
  const { input } = data;
  const estimate = progressEstimator(input.settings);
  let lastPost = 0;
  const onProgress = (p: SeparationProgress) => {
    if (Atomics.load(cancelFlag, 0) !== 0 && !controller.signal.aborted)
      controller.abort(new Error('cancelled'));
    const now = Date.now();
    if (now - lastPost < data.progressIntervalMs) return;
    lastPost = now;
    post({ type: 'progress', progress: estimate(p) });
  };
  try {
    if (input.joint) {
      const out = await fitJoint(input, input.joint, onProgress, controller.signal);
      post({ type: 'result', result: out }, resultBuffers(out));
      return;
    }
    const result = await separate(
      {
        width: input.width,
        height: input.height,
        data: input.pixels,
        mask: input.mask,
        wcs: parseWcs(input.header),
        beam: input.beam,
        unit: input.unit,
      },
      input.settings,
      { onProgress, signal: controller.signal },
    );
    const planes = {
      diffuse: result.diffuse,
      diffuseSky: result.diffuseSky,
      compact: result.compact,
      compactSky: result.compactSky,
      model: result.model,
      residual: result.residual,
      residualNorm: result.residualNorm,
    };
    const out: FitThreadResult = {
      width: result.width,
      height: result.height,
      settings: result.settings,
      settingsDigest: result.settingsDigest,
      catalogue: result.catalogue,
      planes,
      diagnostics: buildDiagnostics(result),
      timings: result.timings,
    };
    post(
      { type: 'result', result: out },
      Object.values(planes).map((plane) => plane.buffer as ArrayBuffer),
    );
  } catch (error) {
    const cancelled = controller.signal.aborted;
    post({ type: 'error', message: error instanceof Error ? error.message : String(error), cancelled });
  }
}

/** A joint run: image 1 is the input's own image, images 2…n come in `joint.others`. */
async function fitJoint(
  input: FitThreadInput,
  joint: NonNullable<FitThreadInput['joint']>,
  onProgress: (p: SeparationProgress) => void,
  signal: AbortSignal,
): Promise<FitThreadResult> {
  const images = [{ ...input, name: joint.referenceName }, ...joint.others].map((image) => ({
    name: image.name,
    width: image.width,
    height: image.height,
    data: image.pixels,
    mask: image.mask,
    wcs: parseWcs(image.header),
    beam: image.beam,
    unit: image.unit,
  }));
  const result = await separateJoint(images, input.settings, {
    perImage: joint.perImage,
    onProgress: (p) => onProgress({ ...p, phase: 'fit' }),
    signal,
  });
  return jointThreadResult(result, joint.inputSha256);
}

void main();
