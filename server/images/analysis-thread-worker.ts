/** Entry of the image analysis thread (see analysis-thread.ts). */
import { parentPort, workerData } from 'node:worker_threads';

import { type AnalysisThreadData, runAnalysisThread } from './analysis-thread';

const port = parentPort;
if (!port) throw new Error('analysis-thread-worker must run in a worker thread.');
void runAnalysisThread(workerData as AnalysisThreadData, (message, transfer) =>
  port.postMessage(message, transfer ?? []),
);
