// @vitest-environment node
/**
 * "Never crash": damaged copies of valid files (bytes changed in the header, the file cut anywhere, header
 * cards replaced by random printable text) either read or are refused with an ImageReadError — never another
 * exception type. Deterministic: a fixed-seed generator picks the damage.
 */
import { readFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { ImageReadError, readImage, readImageAsync } from '../../../server/engine/io/read-image';
import { seededRandom } from '../../../server/engine/random/mulberry32';

const folder = new URL('../../fixtures/astropy/', import.meta.url);

function outcome(read: () => unknown): string {
  try {
    read();
    return 'read';
  } catch (error) {
    if (error instanceof ImageReadError) return error.code;
    return `CRASH ${(error as Error).stack}`;
  }
}

async function outcomeAsync(read: () => Promise<unknown>): Promise<string> {
  try {
    await read();
    return 'read';
  } catch (error) {
    if (error instanceof ImageReadError) return error.code;
    return `CRASH ${(error as Error).stack}`;
  }
}

describe('damaged files are refused, never crash', () => {
  const sources = [
    'fits/bitpix16.fits',
    'fits/extension-heap.fits',
    'fits/cards.fits',
    'fits/bitpix-32.fits.gz',
  ];
  for (const source of sources) {
    it(`${source}: 400 damaged copies`, () => {
      const original = new Uint8Array(readFileSync(new URL(source, folder)));
      const random = seededRandom(source.length * 7919);
      const seen = new Map<string, number>();
      for (let trial = 0; trial < 400; trial++) {
        let bytes = original.slice();
        const kind = trial % 3;
        if (kind === 0) {
          // Change up to 5 bytes in the first 3 blocks to printable characters.
          for (let k = 0; k < 1 + Math.floor(random() * 5); k++) {
            bytes[Math.floor(random() * Math.min(bytes.length, 8640))] = 32 + Math.floor(random() * 95);
          }
        } else if (kind === 1) {
          bytes = bytes.slice(0, Math.floor(random() * bytes.length));
        } else {
          // Replace one whole card by random printable text.
          const at = 80 * Math.floor(random() * 36);
          for (let i = at; i < at + 80 && i < bytes.length; i++) bytes[i] = 32 + Math.floor(random() * 95);
        }
        const result = outcome(() => readImage(bytes));
        expect(result, `trial ${trial}`).not.toMatch(/^CRASH/);
        seen.set(result, (seen.get(result) ?? 0) + 1);
      }
      // The damage really produced refusals, not only successful reads.
      expect([...seen.keys()].filter((k) => k !== 'read').length).toBeGreaterThan(0);
    });
  }

  it('damaged PNG, JPEG and TIFF files are refused through readImageAsync, never crash', async () => {
    const random = seededRandom(99);
    for (const source of [
      'raster/png16-filters.png',
      'raster/png8-rgb.png',
      'raster/rgb.jpg',
      'raster/float32.tif',
    ]) {
      const original = new Uint8Array(readFileSync(new URL(source, folder)));
      for (let trial = 0; trial < 60; trial++) {
        const bytes = original.slice(0, trial % 2 ? original.length : Math.floor(random() * original.length));
        for (let k = 0; k < 3; k++)
          bytes[8 + Math.floor(random() * (bytes.length - 8))] = Math.floor(random() * 256);
        const result = await outcomeAsync(() => readImageAsync(bytes));
        expect(result, `${source} trial ${trial}`).not.toMatch(/^CRASH/);
      }
    }
  });

  it('gzip of garbage and gzip of gzip are refused', () => {
    expect(outcome(() => readImage(gzipSync(new Uint8Array(5000).fill(65))))).toBe('unknown-format');
    expect(outcome(() => readImage(gzipSync(gzipSync(new Uint8Array(10)))))).toBe('unknown-format');
  });
});
