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

const littleEndian = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/** Little-endian float32 bytes of a plane (a plain copy on little-endian machines). */
export function float32ToBytes(plane: Float32Array): Buffer {
  const out = Buffer.alloc(plane.length * 4);
  if (littleEndian) out.set(new Uint8Array(plane.buffer, plane.byteOffset, plane.byteLength));
  else for (let i = 0; i < plane.length; i++) out.writeFloatLE(plane[i]!, i * 4);
  return out;
}

/** A plane from little-endian float32 bytes, in an aligned array of its own. */
export function bytesToFloat32(bytes: Uint8Array): Float32Array {
  const out = new Float32Array(bytes.byteLength >> 2);
  if (littleEndian) {
    new Uint8Array(out.buffer).set(bytes.subarray(0, out.length * 4));
    return out;
  }
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  for (let i = 0; i < out.length; i++) out[i] = view.getFloat32(i * 4, true);
  return out;
}
