// @vitest-environment node
/**
 * Every refusal of readImage, with its exact message (the messages are part of the interface: the service shows
 * them to people). The bad files are built here from header cards (FITS Standard 4.0 layout: 2880-byte blocks).
 */
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { formatHeader, padToBlock, type HeaderCard } from '../../../server/engine/io/header-card';
import { ImageReadError, readImage, readImageAsync } from '../../../server/engine/io/read-image';

/** A FITS file from cards (SIMPLE first) and float32 big-endian data, padded to blocks unless `pad` is false. */
function fitsBytes(cards: HeaderCard[], values: number[], bitpix = -32, pad = true): Uint8Array {
  const header = formatHeader(cards);
  const bytesPerValue = Math.abs(bitpix) / 8;
  const data = new Uint8Array(values.length * bytesPerValue);
  const view = new DataView(data.buffer);
  values.forEach((v, i) => {
    if (bitpix === -32) view.setFloat32(4 * i, v);
    else if (bitpix === 16) view.setInt16(2 * i, v);
  });
  const body = pad ? padToBlock(data) : data;
  const out = new Uint8Array(header.length + body.length);
  out.set(header);
  out.set(body, header.length);
  return out;
}

function imageCards(width: number, height: number, extra: HeaderCard[] = [], bitpix = -32): HeaderCard[] {
  return [
    { keyword: 'SIMPLE', value: true },
    { keyword: 'BITPIX', value: bitpix },
    { keyword: 'NAXIS', value: 2 },
    { keyword: 'NAXIS1', value: width },
    { keyword: 'NAXIS2', value: height },
    ...extra,
  ];
}

function ramp(n: number): number[] {
  return Array.from({ length: n }, (_, i) => i * 0.25);
}

function refusal(bytes: Uint8Array, options = {}): ImageReadError {
  try {
    readImage(bytes, options);
  } catch (error) {
    expect(error).toBeInstanceOf(ImageReadError);
    return error as ImageReadError;
  }
  throw new Error('readImage accepted the input');
}

const ascii = (text: string): Uint8Array => new TextEncoder().encode(text);

describe('readImage refusals', () => {
  it('accepts the well-formed base file these cases corrupt', () => {
    const image = readImage(fitsBytes(imageCards(20, 17), ramp(340)));
    expect([image.width, image.height, image.data[339]]).toEqual([20, 17, 339 * 0.25]);
  });

  it('reads a last data block without its padding (common in hand-written files)', () => {
    const image = readImage(fitsBytes(imageCards(20, 17), ramp(340), -32, false));
    expect(image.data[339]).toBe(339 * 0.25);
  });

  const cases: { name: string; bytes: () => Uint8Array; options?: object; code: string; message: string }[] =
    [
      {
        name: 'empty file',
        bytes: () => new Uint8Array(0),
        code: 'empty-file',
        message: 'The file is empty',
      },
      {
        name: 'text named .fits',
        bytes: () => ascii('hello, this is not an image\n'.repeat(200)),
        options: { fileName: 'field.fits' },
        code: 'not-fits',
        message: 'This is not a FITS file: it does not begin with SIMPLE = T',
      },
      {
        name: 'SIMPLE = F',
        bytes: () =>
          fitsBytes([{ keyword: 'SIMPLE', value: false }, ...imageCards(20, 17).slice(1)], ramp(340)),
        code: 'not-fits',
        message: 'This is not a FITS file: it does not begin with SIMPLE = T',
      },
      {
        name: 'unknown bytes',
        bytes: () => new Uint8Array(4000).fill(7),
        code: 'unknown-format',
        message: 'The file is not a FITS, TIFF, PNG or JPEG image (its first bytes match none)',
      },
      {
        name: 'header without END',
        bytes: () =>
          fitsBytes(imageCards(20, 17), ramp(340))
            .slice(0, 2880)
            .map((b, i) => (i >= 5 * 80 ? 32 : b)),
        code: 'header-without-end',
        message: 'The FITS primary header has no END card: the file is cut short or damaged',
      },
      {
        name: 'truncated data',
        bytes: () => fitsBytes(imageCards(20, 17), ramp(340)).slice(0, 2880 + 100),
        code: 'truncated',
        message: 'The FITS file is truncated: its data need 1360 bytes after the header, got 100',
      },
      {
        name: 'NAXIS larger than the NAXISn cards',
        bytes: () =>
          fitsBytes(
            [...imageCards(20, 17)].map((c) => (c.keyword === 'NAXIS' ? { ...c, value: 3 } : c)),
            ramp(340),
          ),
        code: 'bad-header',
        message: 'NAXIS = 3 but NAXIS3 is missing',
      },
      {
        name: 'NAXIS2 not a length',
        bytes: () => fitsBytes(imageCards(20, -4), ramp(340)),
        code: 'bad-header',
        message: 'NAXIS = 2 but NAXIS2 is -4, not a length',
      },
      {
        name: 'unsupported BITPIX',
        bytes: () => fitsBytes(imageCards(20, 17, [], 24), ramp(340)),
        code: 'unsupported-bitpix',
        message: 'BITPIX = 24 is not a FITS pixel type (8, 16, 32, 64, −32 or −64 are)',
      },
      {
        name: 'absurd dimensions (checked before allocating: the file holds 2 blocks)',
        bytes: () => fitsBytes(imageCards(100000, 100000), ramp(340)),
        code: 'too-many-pixels',
        message: 'The image has 100000×100000 = 10000000000 pixels, more than the limit of 64000000',
      },
      {
        name: 'a configurable pixel limit',
        bytes: () => fitsBytes(imageCards(20, 17), ramp(340)),
        options: { maxPixels: 300 },
        code: 'too-many-pixels',
        message: 'The image has 20×17 = 340 pixels, more than the limit of 300',
      },
      {
        name: 'all pixels blank (NaN)',
        bytes: () => fitsBytes(imageCards(20, 17), new Array(340).fill(NaN)),
        code: 'all-blank',
        message: 'Every pixel of the image is blank (BLANK or NaN)',
      },
      {
        name: 'all pixels blank (BLANK)',
        bytes: () =>
          fitsBytes(imageCards(20, 17, [{ keyword: 'BLANK', value: -1 }], 16), new Array(340).fill(-1), 16),
        code: 'all-blank',
        message: 'Every pixel of the image is blank (BLANK or NaN)',
      },
      {
        name: 'constant image (with some NaN)',
        bytes: () => fitsBytes(imageCards(20, 17), [NaN, ...new Array(339).fill(3)]),
        code: 'constant',
        message: 'The image is constant: every valid pixel equals 3',
      },
      {
        name: '8×8 image',
        bytes: () => fitsBytes(imageCards(8, 8), ramp(64)),
        code: 'too-small',
        message: 'The image is 8×8 pixels, smaller than the minimum of 16×16',
      },
      {
        name: 'a 1-pixel-high image',
        bytes: () => fitsBytes(imageCards(400, 1), ramp(400)),
        code: 'too-small',
        message: 'The image is 400×1 pixels, smaller than the minimum of 16×16',
      },
      {
        name: '1-D array',
        bytes: () =>
          fitsBytes(
            [
              { keyword: 'SIMPLE', value: true },
              { keyword: 'BITPIX', value: -32 },
              { keyword: 'NAXIS', value: 1 },
              { keyword: 'NAXIS1', value: 340 },
            ],
            ramp(340),
          ),
        code: 'not-an-image',
        message: 'This FITS file holds a 1-D array of 340 values, not an image',
      },
      {
        name: 'two axes of planes',
        bytes: () =>
          fitsBytes(
            [
              ...imageCards(16, 16).map((c) => (c.keyword === 'NAXIS' ? { ...c, value: 4 } : c)),
              { keyword: 'NAXIS3', value: 2 },
              { keyword: 'NAXIS4', value: 2 },
              { keyword: 'CTYPE3', value: 'FREQ' },
              { keyword: 'CTYPE4', value: 'STOKES' },
            ],
            ramp(1024),
          ),
        code: 'not-an-image',
        message:
          'This FITS file holds more than one axis of planes (2 along axis 3 (FREQ), 2 along axis 4 (STOKES)); only one such axis can be chosen from',
      },
      {
        name: 'a plane asked of a single-plane image',
        bytes: () => fitsBytes(imageCards(20, 17), ramp(340)),
        options: { plane: 2 },
        code: 'bad-plane',
        message: 'Plane 2 does not exist: this image has a single plane',
      },
      {
        name: 'a primary without data and only a table after it',
        bytes: () => {
          const primary = formatHeader([
            { keyword: 'SIMPLE', value: true },
            { keyword: 'BITPIX', value: 8 },
            { keyword: 'NAXIS', value: 0 },
            { keyword: 'EXTEND', value: true },
          ]);
          const table = fitsBytes(
            [
              { keyword: 'XTENSION', value: 'BINTABLE' },
              { keyword: 'BITPIX', value: 8 },
              { keyword: 'NAXIS', value: 2 },
              { keyword: 'NAXIS1', value: 4 },
              { keyword: 'NAXIS2', value: 3 },
              { keyword: 'PCOUNT', value: 0 },
              { keyword: 'GCOUNT', value: 1 },
              { keyword: 'TFIELDS', value: 1 },
              { keyword: 'TFORM1', value: 'E' },
            ],
            [1, 2, 3],
          );
          const out = new Uint8Array(primary.length + table.length);
          out.set(primary);
          out.set(table, primary.length);
          return out;
        },
        code: 'no-image',
        message: 'This FITS file holds no image: no primary array and no IMAGE extension with data',
      },
      {
        name: 'gzip bomb: 20 MB of zeros compressed to ~20 kB, with a 1 MiB cap',
        bytes: () => gzipSync(new Uint8Array(20_000_000)),
        options: { maxInflatedBytes: 1024 ** 2 },
        code: 'inflate-limit',
        message: 'The gzip data inflate beyond the limit of 1 MiB; the file was refused',
      },
      {
        name: 'a cut gzip stream',
        bytes: () => gzipSync(fitsBytes(imageCards(20, 17), ramp(340))).slice(0, 60),
        code: 'bad-gzip',
        message: 'The gzip data are corrupt or incomplete (unexpected end of file)',
      },
    ];

  it(`covers ${cases.length} refusal cases`, () => {
    expect(cases.length).toBe(22);
  });

  for (const c of cases) {
    it(`${c.name} → ${c.code}`, () => {
      const bytes = c.bytes();
      const error = refusal(bytes, c.options);
      expect({ code: error.code, message: error.message }).toEqual({ code: c.code, message: c.message });
    });
  }

  it('the gzip bomb is small on disk and the cap stops it long before its full size', () => {
    const bomb = gzipSync(new Uint8Array(20_000_000));
    expect(bomb.length).toBeLessThan(30_000);
  });

  it('readImage (sync) sends other formats to readImageAsync; readImageAsync refuses the same FITS faults', async () => {
    const tiffMagic = new Uint8Array([0x49, 0x49, 0x2a, 0, ...new Array(100).fill(0)]);
    expect(refusal(tiffMagic).message).toBe('TIFF images are decoded asynchronously: call readImageAsync');
    await expect(readImageAsync(fitsBytes(imageCards(8, 8), ramp(64)))).rejects.toThrow(
      'The image is 8×8 pixels, smaller than the minimum of 16×16',
    );
  });
});
