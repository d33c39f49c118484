/** Small image files made in the tests with the engine's FITS writer, geotiff and jimp, and upload helpers. */
import { gzipSync } from 'node:zlib';

import type { Express } from 'express';
import { writeArrayBuffer } from 'geotiff';
import { Jimp } from 'jimp';
import request, { type Response } from 'supertest';

import { SeededRandom } from '../../../samples/random';
import type { HeaderCard } from '../../../server/engine/io/header-card';
import { writeFits } from '../../../server/engine/io/write-fits';
import type { BrowserClient } from '../../support/test-app';

export interface Plane {
  width: number;
  height: number;
  data: Float32Array;
}

/** Gaussian noise of σ around `level`, plus a bright pixel block near the top so orientation can be checked. */
export function noisePlane(width: number, height: number, seed: number, sigma = 1, level = 10): Plane {
  const random = new SeededRandom(seed);
  const data = Float32Array.from({ length: width * height }, () => level + sigma * random.normal());
  return { width, height, data };
}

/** A celestial TAN WCS (1.5″ pixels, east left) and a beam, as FITS cards. */
export function skyCards(): HeaderCard[] {
  return [
    { keyword: 'CTYPE1', value: 'RA---TAN' },
    { keyword: 'CTYPE2', value: 'DEC--TAN' },
    { keyword: 'CRPIX1', value: 10.5, real: true },
    { keyword: 'CRPIX2', value: 8.5, real: true },
    { keyword: 'CRVAL1', value: 283.75, real: true },
    { keyword: 'CRVAL2', value: 38.6, real: true },
    { keyword: 'CDELT1', value: -1.5 / 3600, real: true },
    { keyword: 'CDELT2', value: 1.5 / 3600, real: true },
    { keyword: 'RADESYS', value: 'ICRS' },
    { keyword: 'BMAJ', value: 6 / 3600, real: true },
    { keyword: 'BMIN', value: 4.5 / 3600, real: true },
    { keyword: 'BPA', value: 30, real: true },
    { keyword: 'BUNIT', value: 'Jy/beam' },
  ];
}

export function fitsFile(plane: Plane, header: HeaderCard[] = [], mask?: Uint8Array): Buffer {
  return Buffer.from(writeFits({ ...plane, mask }, { header }));
}

export const gzipped = (bytes: Uint8Array): Buffer => gzipSync(bytes);

export function tiffFile(plane: Plane): Buffer {
  // TIFF rows are stored top first; the reader flips them to bottom first.
  return Buffer.from(
    writeArrayBuffer(plane.data, { width: plane.width, height: plane.height }) as ArrayBuffer,
  );
}

/** An 8-bit grey picture with a seeded pattern. */
export async function rasterFile(
  width: number,
  height: number,
  seed: number,
  mime: 'image/png' | 'image/jpeg',
): Promise<Buffer> {
  const random = new SeededRandom(seed);
  const picture = new Jimp({ width, height, color: 0x000000ff });
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const v = Math.min(255, Math.max(0, Math.round(100 + 2 * x + y + 20 * random.normal())));
      picture.setPixelColor(((v << 24) | (v << 16) | (v << 8) | 255) >>> 0, x, y);
    }
  }
  return mime === 'image/png'
    ? picture.getBuffer('image/png')
    : picture.getBuffer('image/jpeg', { quality: 95 });
}

export async function uploadAs(
  client: BrowserClient,
  projectId: number,
  bytes: Buffer,
  fileName: string,
  fields: Record<string, string> = {},
) {
  const token = await client.csrfToken();
  const test = client.agent.post(`/api/projects/${projectId}/images`).set('x-csrf-token', token);
  for (const [key, value] of Object.entries(fields)) test.field(key, value);
  return test.attach('file', bytes, fileName);
}

export function uploadWithToken(
  app: Express,
  token: string,
  projectId: number,
  bytes: Buffer,
  fileName: string,
) {
  return request(app)
    .post(`/api/projects/${projectId}/images`)
    .set('authorization', `Bearer ${token}`)
    .attach('file', bytes, fileName);
}

/**
 * Binary response bodies as a Buffer (supertest leaves octet-stream and PNG unparsed without this);
 * JSON error bodies are still parsed.
 */
export function binary(res: Response, callback: (error: Error | null, body: unknown) => void): void {
  const stream = res as unknown as NodeJS.ReadableStream & { headers: Record<string, string | undefined> };
  const chunks: Buffer[] = [];
  stream.on('data', (chunk: Buffer) => chunks.push(chunk));
  stream.on('end', () => {
    const body = Buffer.concat(chunks);
    const json = (stream.headers['content-type'] ?? '').startsWith('application/json');
    callback(null, json ? (JSON.parse(body.toString('utf8')) as unknown) : body);
  });
  stream.on('error', (error: Error) => callback(error, Buffer.alloc(0)));
}
