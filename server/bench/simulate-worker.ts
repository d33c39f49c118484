/**
 * Worker thread of server/bench/separate-one.ts: simulates the bench sky and posts back its image and mask (the
 * buffers are transferred, not copied). The simulator's other planes and its garbage die with the worker's heap,
 * so the bench process holds what a caller that read the image from a file would hold.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { simulateSky, type SkySimulationOptions } from '../../samples/sky-simulator';

const sky = simulateSky(workerData as SkySimulationOptions);
// float32, as a map read from a BITPIX −32 FITS file arrives
const image = Float32Array.from(sky.image);
const mask = sky.mask;
parentPort!.postMessage({ image, mask }, [image.buffer as ArrayBuffer, mask.buffer as ArrayBuffer]);
