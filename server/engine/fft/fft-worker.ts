/**
 * Worker side of FftThread: builds this thread's own transform code (a PFFFT instance or the float64
 * TypeScript transform) over the shared buffers and runs the worker's share of each command.
 */
import { workerData } from 'node:worker_threads';
import {
  COMMAND_FORWARD_COLUMNS,
  COMMAND_FORWARD_ROWS,
  COMMAND_INVERSE_COLUMNS,
  COMMAND_INVERSE_ROWS,
  serveCommands,
  type FftWorkerData,
} from './fft-thread';
import { PffftCore } from './pffft-core';
import { RealFft2dFloat64 } from './real-fft-2d-float64';

const data = workerData as FftWorkerData;
const { width, height, rowSplit, columnSplit } = data;
const spectrumWidth = Math.floor(width / 2) + 1;
const f64 = (name: string) => new Float64Array(data.buffers[name]!);

if (data.kind === 'float32') {
  const core = new PffftCore(width, height);
  const image = f64('image');
  const rows = new Float32Array(data.buffers.rows!);
  const re = f64('re');
  const im = f64('im');
  serveCommands(data, (command, params) => {
    if (command === COMMAND_FORWARD_ROWS) core.forwardRows(image, rows, rowSplit, height, params[0]!);
    else if (command === COMMAND_FORWARD_COLUMNS)
      core.forwardColumns(rows, re, im, columnSplit, spectrumWidth, 0);
    else if (command === COMMAND_INVERSE_COLUMNS)
      core.inverseColumns(re, im, rows, columnSplit, spectrumWidth, 0);
    else if (command === COMMAND_INVERSE_ROWS) {
      core.inverseRows(rows, image, rowSplit, height, params[1]!, params[0]!);
    }
  });
} else {
  const fft = new RealFft2dFloat64(width, height);
  const image = f64('image');
  const re = f64('re');
  const im = f64('im');
  serveCommands(data, (command) => {
    if (command === COMMAND_FORWARD_ROWS) fft.forwardRows(image, re, im, rowSplit, height);
    else if (command === COMMAND_FORWARD_COLUMNS)
      fft.columns(re, im, re, im, columnSplit, spectrumWidth, false);
    else if (command === COMMAND_INVERSE_COLUMNS)
      fft.columns(re, im, re, im, columnSplit, spectrumWidth, true);
    else if (command === COMMAND_INVERSE_ROWS) fft.inverseRows(re, im, image, rowSplit, height);
  });
}
