/**
 * Worker thread of server/bench/separate-one.ts: simulates the bench sky and posts back its image and mask (the
 * buffers are transferred, not copied). The simulator's other planes and its garbage die with the worker's heap,
 * so the bench process holds what a caller that read the image from a file would hold.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { simulateSky, type SkySimulationOptions } from '../../samples/sky-simulator';

const { image, mask } = simulateSky(workerData as SkySimulationOptions);
parentPort!.postMessage({ image, mask }, [image.buffer as ArrayBuffer, mask.buffer as ArrayBuffer]);
