import { Model } from 'objection';

import type { ComponentName } from '../../shared/runs';

/** One float32 plane (little-endian, row-major, x fastest, row 0 = FITS y = 1) of a finished run. */
export class RunComponent extends Model {
  static override tableName = 'run_components';

  id!: number;
  runId!: number;
  name!: ComponentName;
  width!: number;
  height!: number;
  data!: Buffer;
  byteSize!: number;

  /** The plane as a Float32Array (copied, so the alignment is right). */
  plane(): Float32Array {
    return bytesToFloat32(this.data);
  }
}

/** Little-endian float32 bytes of a plane. */
export function float32ToBytes(plane: Float32Array): Buffer {
  const out = Buffer.alloc(plane.length * 4);
  for (let i = 0; i < plane.length; i++) out.writeFloatLE(plane[i]!, i * 4);
  return out;
}

export function bytesToFloat32(bytes: Uint8Array): Float32Array {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const out = new Float32Array(bytes.byteLength >> 2);
  for (let i = 0; i < out.length; i++) out[i] = view.getFloat32(i * 4, true);
  return out;
}
