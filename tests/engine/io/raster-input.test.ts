// @vitest-environment node
/**
 * TIFF, PNG and JPEG inputs. Reference values: tests/fixtures/astropy/raster/cases.json, written with the files by
 * tests/fixtures/astropy/raster/make.py (Debian's python3-pil + numpy; luma weights ITU-R BT.709 for PNG/TIFF and
 * BT.601 for JPEG). Plus round trips through the libraries' own writers and the size checks made before decoding.
 */
import { readFileSync } from 'node:fs';
import { writeArrayBuffer } from 'geotiff';
import { Jimp } from 'jimp';
import { describe, expect, it } from 'vitest';
import { readImage, readImageAsync } from '../../../server/engine/io/read-image';

interface Case {
  file: string;
  width: number;
  height: number;
  kind: string;
  tolerance: number;
  pixels: number[];
}
const folder = new URL('../../fixtures/astropy/raster/', import.meta.url);
const fixture = JSON.parse(readFileSync(new URL('cases.json', folder), 'utf8')) as {
  pil: string;
  cases: Case[];
};

describe(`raster inputs against PIL ${fixture.pil}`, () => {
  it('finds the fixture files', () => expect(fixture.cases.length).toBe(9));

  for (const c of fixture.cases) {
    it(`${c.file} (${c.kind}) within ${c.tolerance} (+ float32 rounding)`, async () => {
      const image = await readImageAsync(readFileSync(new URL(c.file, folder)), { fileName: c.file });
      expect([image.width, image.height, image.wcs, image.header]).toEqual([c.width, c.height, null, []]);
      expect(image.format).toBe(c.file.endsWith('.jpg') ? 'jpeg' : c.file.endsWith('.png') ? 'png' : 'tiff');
      let worst = 0;
      for (let i = 0; i < c.pixels.length; i++) {
        const expected = c.pixels[i]!;
        const difference = Math.abs(image.data[i]! - expected);
        const tolerance = c.tolerance + 2 ** -24 * Math.abs(expected);
        worst = Math.max(worst, difference);
        expect(
          difference,
          `${c.file} pixel ${i}: expected ${expected}, got ${image.data[i]}, tolerance ${tolerance}`,
        ).toBeLessThanOrEqual(tolerance);
      }
      expect(image.mask.every((m) => m === 1)).toBe(true);
    });
  }

  it('jimp alone reduces a 16-bit PNG to 8 bits (why png-16bit.ts exists)', async () => {
    const c = fixture.cases.find((x) => x.file === 'png16-grey.png')!;
    const bitmap = (await Jimp.read(readFileSync(new URL(c.file, folder)))).bitmap;
    // jimp (through pngjs) rescales 16-bit samples to round(v / 257): the low byte is lost.
    for (let x = 0; x < 5; x++) {
      const stored = c.pixels[(c.height - 1) * c.width + x]!; // stored top row = our last row
      expect(bitmap.data[4 * x]).toBe(Math.round(stored / 257));
    }
    const stored = c.pixels[(c.height - 1) * c.width]!;
    expect(stored).toBeGreaterThan(255); // the fixture really uses more than 8 bits here
  });
});

describe('round trips through the libraries’ writers', () => {
  const width = 24;
  const height = 18;
  it('float32 TIFF from geotiff.writeArrayBuffer, rows flipped to bottom-first', async () => {
    const values = Float32Array.from({ length: width * height }, (_, i) => Math.sin(i) * 1e-2);
    const tiff = new Uint8Array(writeArrayBuffer(values, { width, height }) as ArrayBuffer);
    const image = await readImageAsync(tiff);
    for (let row = 0; row < height; row++) {
      for (let x = 0; x < width; x++) {
        // Stored row `row` (top first) is our row height − 1 − row.
        expect(image.data[(height - 1 - row) * width + x]).toBe(values[row * width + x]);
      }
    }
  });
  it('8-bit grey PNG from jimp; transparent pixels masked', async () => {
    const picture = new Jimp({ width, height, color: 0x000000ff });
    for (let y = 0; y < height; y++) {
      for (let x = 0; x < width; x++) {
        const v = (x * 7 + y * 3) % 256;
        picture.setPixelColor(
          ((v << 24) | (v << 16) | (v << 8) | (x === 0 && y === 0 ? 0 : 255)) >>> 0,
          x,
          y,
        );
      }
    }
    const image = await readImageAsync(new Uint8Array(await picture.getBuffer('image/png')));
    expect(image.data[(height - 1) * width + 5]).toBe(35); // stored (5, 0): 5·7 = 35
    expect(image.mask[(height - 1) * width]).toBe(0); // stored (0, 0) was fully transparent
    expect(image.mask[(height - 1) * width + 1]).toBe(1);
  });
});

describe('size checks before decoding', () => {
  it('a PNG header claiming 100000 × 100000 pixels is refused from its IHDR', async () => {
    const bytes = new Uint8Array(readFileSync(new URL('png8-grey.png', folder)));
    const view = new DataView(bytes.buffer, bytes.byteOffset);
    view.setUint32(16, 100000);
    view.setUint32(20, 100000);
    await expect(readImageAsync(bytes)).rejects.toThrow(
      'The image has 100000×100000 = 10000000000 pixels, more than the limit of 64000000',
    );
  });
  it('a JPEG is refused from its frame header with a small limit', async () => {
    await expect(
      readImageAsync(readFileSync(new URL('rgb.jpg', folder)), { maxPixels: 100 }),
    ).rejects.toThrow('The image has 20×17 = 340 pixels, more than the limit of 100');
  });
  it('a TIFF smaller than 16 × 16 is refused', async () => {
    const tiff = new Uint8Array(
      writeArrayBuffer(
        Float32Array.from({ length: 64 }, (_, i) => i),
        { width: 8, height: 8 },
      ) as ArrayBuffer,
    );
    await expect(readImageAsync(tiff)).rejects.toThrow(
      'The image is 8×8 pixels, smaller than the minimum of 16×16',
    );
  });
  it('a corrupt PNG gets a message, not a crash', async () => {
    const bytes = new Uint8Array(readFileSync(new URL('png8-grey.png', folder))).slice(0, 60);
    await expect(readImageAsync(bytes)).rejects.toThrow(/^The PNG image cannot be decoded/);
  });
  it('the synchronous reader points to readImageAsync for PNG', () => {
    expect(() => readImage(readFileSync(new URL('png8-grey.png', folder)))).toThrow(
      'PNG images are decoded asynchronously: call readImageAsync',
    );
  });
});
