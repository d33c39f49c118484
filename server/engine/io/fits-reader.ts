/**
 * FITS image reader after the FITS Standard 4.0 (IAU FITS Working Group, 2018):
 * - the file is a sequence of HDUs, each a header of 2880-byte blocks ending in END, then a data unit padded to
 *   whole blocks (section 3.3); the data unit holds |BITPIX|/8 · GCOUNT · (PCOUNT + NAXIS1·…·NAXISn) bytes
 *   (section 7.1.1, eq. 2); the primary HDU has PCOUNT = 0, GCOUNT = 1 (section 4.4.1.1);
 * - the image read is the primary array when it holds data, else the first IMAGE extension with data
 *   (section 7.1); other HDUs are skipped by their sizes; random groups (GROUPS = T) are never images;
 * - pixels are big-endian: BITPIX 8 (unsigned), 16, 32, 64 (two's complement) and −32, −64 (IEEE 754)
 *   (section 5.2–5.3); physical = BZERO + BSCALE · stored (section 5.3), which also covers the unsigned-integer
 *   convention (e.g. BITPIX 16 with BZERO = 32768, table 11);
 * - integer pixels equal to BLANK and non-finite reals are undefined (sections 4.4.2.5, 5.3) and are masked;
 * - NAXIS > 2 is accepted when at most one axis beyond the second is longer than 1 (a cube: one plane is
 *   chosen with the plane option); axes of length 1 (frequency, Stokes) are dropped.
 * The final data block may lack its padding (common in files written by hand); missing data bytes are an error.
 */
import { parseWcsWithWarnings } from '../wcs/wcs';
import { BLOCK_BYTES, cardNumber, cardString, findCard, parseHeader, type HeaderCard } from './header-card';
import { checkContent, checkDimensions, ImageReadError, type Beam, type SkyImage } from './sky-image';

export interface FitsReadOptions {
  /** 1-based plane of a cube. @default none (a cube without it is refused) */
  plane?: number;
  /** Largest accepted number of pixels in the plane read. @default 64e6 */
  maxPixels?: number;
}

const SUPPORTED_BITPIX = [8, 16, 32, 64, -32, -64];

interface Hdu {
  cards: HeaderCard[];
  index: number;
  dataOffset: number;
  dataBytes: number;
  bitpix: number;
  axes: number[];
}

/** True when the bytes start like a FITS primary header (keyword SIMPLE in columns 1–8). */
export function looksLikeFits(bytes: Uint8Array): boolean {
  const start = String.fromCharCode(...bytes.subarray(0, 9));
  return start === 'SIMPLE  =';
}

/** Reads the image of a FITS file (see the file comment for which HDU and which rules). */
export function readFits(bytes: Uint8Array, options: FitsReadOptions = {}): SkyImage {
  const maxPixels = options.maxPixels ?? 64e6;
  const primary = readHdu(bytes, 0, 0);
  if (primary.cards[0]?.keyword !== 'SIMPLE' || primary.cards[0].value !== true) {
    throw new ImageReadError('not-fits', 'This is not a FITS file: it does not begin with SIMPLE = T');
  }
  let chosen: Hdu | null = hasImageData(primary) ? primary : null;
  let compressed = false;
  let offset = primary.dataOffset + padded(primary.dataBytes);
  for (let index = 1; chosen === null && offset < bytes.length; index++) {
    if (String.fromCharCode(...bytes.subarray(offset, offset + 8)) !== 'XTENSION') break;
    const hdu = readHdu(bytes, offset, index);
    const xtension = cardString(hdu.cards, 'XTENSION')?.trim();
    if (xtension === 'IMAGE' && hasImageData(hdu)) chosen = hdu;
    if (xtension === 'BINTABLE' && findCard(hdu.cards, 'ZIMAGE')?.value === true) compressed = true;
    offset = hdu.dataOffset + padded(hdu.dataBytes);
  }
  if (chosen === null) {
    if (compressed) {
      throw new ImageReadError(
        'no-image',
        'This FITS file holds only a tile-compressed image (ZIMAGE); save it uncompressed and try again',
      );
    }
    if (primary.axes.length === 1) {
      throw new ImageReadError(
        'not-an-image',
        `This FITS file holds a 1-D array of ${primary.axes[0]} values, not an image`,
      );
    }
    throw new ImageReadError(
      'no-image',
      'This FITS file holds no image: no primary array and no IMAGE extension with data',
    );
  }
  const header = chosen.index > 0 ? inherit(primary.cards, chosen.cards) : chosen.cards;
  return decodeImage(bytes, chosen, header, options.plane, maxPixels);
}

function padded(size: number): number {
  return Math.ceil(size / BLOCK_BYTES) * BLOCK_BYTES;
}

function hasImageData(hdu: Hdu): boolean {
  return hdu.axes.length >= 2 && hdu.dataBytes > 0 && findCard(hdu.cards, 'GROUPS')?.value !== true;
}

/** With INHERIT = T an extension also takes the primary header's cards it does not set itself (common practice). */
function inherit(primaryCards: HeaderCard[], extensionCards: HeaderCard[]): HeaderCard[] {
  if (findCard(extensionCards, 'INHERIT')?.value !== true) return extensionCards;
  const structural =
    /^(SIMPLE|BITPIX|NAXIS\d*|EXTEND|PCOUNT|GCOUNT|XTENSION|EXTNAME|CHECKSUM|DATASUM|BLANK|BSCALE|BZERO)$/;
  const own = new Set(extensionCards.map((card) => card.keyword));
  const inherited = primaryCards.filter(
    (card) => card.value !== undefined && !structural.test(card.keyword) && !own.has(card.keyword),
  );
  return [...extensionCards, ...inherited];
}

/** Parses one HDU's header and the size of its data unit, checking the mandatory keywords. */
function readHdu(bytes: Uint8Array, offset: number, index: number): Hdu {
  const parsed = parseHeader(bytes, offset);
  const where = index === 0 ? 'primary header' : `header of extension ${index}`;
  if (!parsed) {
    if (index === 0 && !looksLikeFits(bytes)) {
      throw new ImageReadError('not-fits', 'This is not a FITS file: it does not begin with SIMPLE = T');
    }
    throw new ImageReadError(
      'header-without-end',
      `The FITS ${where} has no END card: the file is cut short or damaged`,
    );
  }
  const { cards, dataOffset } = parsed;
  const bitpix = cardNumber(cards, 'BITPIX');
  if (bitpix === undefined) throw new ImageReadError('bad-header', `The FITS ${where} has no BITPIX card`);
  if (!SUPPORTED_BITPIX.includes(bitpix)) {
    throw new ImageReadError(
      'unsupported-bitpix',
      `BITPIX = ${bitpix} is not a FITS pixel type (8, 16, 32, 64, −32 or −64 are)`,
    );
  }
  const naxis = cardNumber(cards, 'NAXIS');
  if (naxis === undefined || !Number.isInteger(naxis) || naxis < 0 || naxis > 999) {
    throw new ImageReadError(
      'bad-header',
      `The FITS ${where} has no valid NAXIS card (an integer from 0 to 999)`,
    );
  }
  const axes: number[] = [];
  for (let n = 1; n <= naxis; n++) {
    const length = cardNumber(cards, `NAXIS${n}`);
    if (length === undefined || !Number.isInteger(length) || length < 0) {
      throw new ImageReadError(
        'bad-header',
        `NAXIS = ${naxis} but NAXIS${n} is ${length === undefined ? 'missing' : `${length}, not a length`}`,
      );
    }
    axes.push(length);
  }
  const groups = findCard(cards, 'GROUPS')?.value === true && axes[0] === 0;
  const pcount = index === 0 && !groups ? 0 : (cardNumber(cards, 'PCOUNT') ?? 0);
  const gcount = index === 0 && !groups ? 1 : (cardNumber(cards, 'GCOUNT') ?? 1);
  const elements = naxis === 0 ? 0 : (groups ? axes.slice(1) : axes).reduce((a, b) => a * b, 1);
  const dataBytes = naxis === 0 ? 0 : (Math.abs(bitpix) / 8) * gcount * (pcount + elements);
  if (!Number.isFinite(dataBytes) || !Number.isSafeInteger(Math.ceil(dataBytes))) {
    throw new ImageReadError(
      'bad-header',
      `The FITS ${where} declares an impossible data size (${axes.join(' × ')})`,
    );
  }
  return { cards, index, dataOffset, dataBytes, bitpix, axes };
}

/** Chooses the plane, checks sizes, converts pixels and builds the SkyImage. */
function decodeImage(
  bytes: Uint8Array,
  hdu: Hdu,
  header: HeaderCard[],
  plane: number | undefined,
  maxPixels: number,
): SkyImage {
  const [width = 0, height = 0, ...extra] = hdu.axes;
  const cubeAxes = extra.map((length, i) => ({ axis: i + 3, length })).filter((a) => a.length > 1);
  const axisName = (axis: number): string => {
    const ctype = cardString(header, `CTYPE${axis}`)?.trim();
    return ctype ? `axis ${axis} (${ctype})` : `axis ${axis}`;
  };
  if (cubeAxes.length > 1) {
    const list = cubeAxes.map((a) => `${a.length} along ${axisName(a.axis)}`).join(', ');
    throw new ImageReadError(
      'not-an-image',
      `This FITS file holds more than one axis of planes (${list}); only one such axis can be chosen from`,
    );
  }
  const cube = cubeAxes[0];
  let planeIndex = 0;
  if (cube) {
    if (plane === undefined) {
      throw new ImageReadError(
        'cube-needs-plane',
        `This FITS file holds a cube of ${cube.length} planes along ${axisName(cube.axis)}; choose one with the plane option (1–${cube.length})`,
      );
    }
    if (!Number.isInteger(plane) || plane < 1 || plane > cube.length) {
      throw new ImageReadError(
        'bad-plane',
        `Plane ${plane} does not exist: the cube has planes 1–${cube.length} along ${axisName(cube.axis)}`,
      );
    }
    planeIndex = plane - 1;
  } else if (plane !== undefined && plane !== 1) {
    throw new ImageReadError('bad-plane', `Plane ${plane} does not exist: this image has a single plane`);
  }
  checkDimensions(width, height, maxPixels);

  const bytesPerPixel = Math.abs(hdu.bitpix) / 8;
  const available = Math.max(0, bytes.length - hdu.dataOffset);
  const needed = width * height * (extra.reduce((a, b) => a * b, 1) || 1) * bytesPerPixel;
  if (available < needed) {
    throw new ImageReadError(
      'truncated',
      `The FITS file is truncated: its data need ${needed} bytes after the header, got ${available}`,
    );
  }

  const count = width * height;
  const start = hdu.dataOffset + planeIndex * count * bytesPerPixel;
  const view = new DataView(bytes.buffer, bytes.byteOffset + start, count * bytesPerPixel);
  const bscale = cardNumber(header, 'BSCALE') ?? 1;
  const bzero = cardNumber(header, 'BZERO') ?? 0;
  const blank = hdu.bitpix > 0 ? cardNumber(header, 'BLANK') : undefined;
  const data = new Float32Array(count);
  const mask = new Uint8Array(count);
  convertPixels(view, hdu.bitpix, bscale, bzero, blank, data, mask);
  checkContent(data, mask);

  const { wcs, warnings } = parseWcsWithWarnings(header);
  const unit = cardString(header, 'BUNIT')?.trim() || null;
  return {
    width,
    height,
    data,
    mask,
    header,
    wcs,
    beam: readBeam(header),
    unit,
    format: 'fits',
    plane: cube ? planeIndex + 1 : null,
    originalAxes: hdu.axes,
    warnings,
  };
}

/** Big-endian stored values → physical values; BLANK and non-finite values are masked (data = 0 there). */
function convertPixels(
  view: DataView,
  bitpix: number,
  bscale: number,
  bzero: number,
  blank: number | undefined,
  data: Float32Array,
  mask: Uint8Array,
): void {
  const n = data.length;
  const store = (i: number, stored: number): void => {
    const physical = bzero + bscale * stored;
    const value = Math.fround(physical);
    if (Number.isFinite(value)) {
      data[i] = value;
      mask[i] = 1;
    }
  };
  switch (bitpix) {
    case 8:
      for (let i = 0; i < n; i++) {
        const v = view.getUint8(i);
        if (v !== blank) store(i, v);
      }
      break;
    case 16:
      for (let i = 0; i < n; i++) {
        const v = view.getInt16(2 * i);
        if (v !== blank) store(i, v);
      }
      break;
    case 32:
      for (let i = 0; i < n; i++) {
        const v = view.getInt32(4 * i);
        if (v !== blank) store(i, v);
      }
      break;
    case 64: {
      const blank64 = blank === undefined ? undefined : BigInt(blank);
      for (let i = 0; i < n; i++) {
        const v = view.getBigInt64(8 * i);
        if (v !== blank64) store(i, Number(v));
      }
      break;
    }
    case -32:
      for (let i = 0; i < n; i++) store(i, view.getFloat32(4 * i));
      break;
    case -64:
      for (let i = 0; i < n; i++) store(i, view.getFloat64(8 * i));
      break;
  }
}

/**
 * The restoring beam: BMAJ/BMIN/BPA cards (degrees), else the last HISTORY card of the form
 * "… BMAJ= 1.2E-03 BMIN= 1.0E-03 BPA= 30.0" that some radio reduction packages write instead.
 */
export function readBeam(header: readonly HeaderCard[]): Beam | null {
  const bmaj = cardNumber(header, 'BMAJ');
  const bmin = cardNumber(header, 'BMIN');
  if (bmaj !== undefined && bmin !== undefined && bmaj > 0 && bmin > 0) {
    return { majorDeg: bmaj, minorDeg: bmin, paDeg: cardNumber(header, 'BPA') ?? 0 };
  }
  const pattern = /BMAJ\s*=\s*([-+\d.EeDd]+)\s+BMIN\s*=\s*([-+\d.EeDd]+)\s+BPA\s*=\s*([-+\d.EeDd]+)/;
  for (let i = header.length - 1; i >= 0; i--) {
    const card = header[i];
    if (card?.keyword !== 'HISTORY' || !card.comment) continue;
    const match = pattern.exec(card.comment);
    if (!match) continue;
    const [major, minor, pa] = match.slice(1).map((t) => Number(t.replace(/[Dd]/, 'E')));
    if (major !== undefined && minor !== undefined && major > 0 && minor > 0) {
      return { majorDeg: major, minorDeg: minor, paDeg: Number.isFinite(pa) ? (pa as number) : 0 };
    }
  }
  return null;
}
