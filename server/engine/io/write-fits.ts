/**
 * FITS writer for 2-D float32 images (FITS Standard 4.0): a primary HDU with BITPIX = −32, NAXIS = 2,
 * big-endian IEEE 754 pixels (section 5.3), header and data each padded to 2880-byte blocks (blanks / zeros).
 *
 * From the input header it keeps the WCS of axes 1 and 2 (FITS WCS papers I and II keywords, including the
 * alternate descriptions A–Z), the beam (BMAJ/BMIN/BPA), the unit and a few observation cards; axes beyond the
 * second (a squeezed frequency or Stokes axis) are dropped, since the image written has two. Then it adds the
 * provenance: ORIGIN = 'Skysieve', the software version, a settings digest, the caller's extra cards and HISTORY.
 * Masked pixels (mask = 0) and non-finite values are written as NaN, FITS's undefined real (section 5.3).
 */
import { BLOCK_BYTES, formatHeader, type HeaderCard } from './header-card';

export { formatCard, formatHeader, padToBlock, parseHeader, type HeaderCard } from './header-card';

export interface WriteFitsImage {
  width: number;
  height: number;
  /** Row-major, x fastest, row 0 = FITS y = 1. */
  data: Float32Array | Float64Array;
  /** 1 = valid, 0 = written as NaN. @default all valid */
  mask?: Uint8Array;
}

export interface WriteFitsOptions {
  /** Header of the input image, to carry its WCS, beam and observation cards. @default [] */
  header?: readonly HeaderCard[];
  /** Extra provenance cards, written after ORIGIN/version/digest (e.g. HISTORY, settings). @default [] */
  cards?: readonly HeaderCard[];
  /** BUNIT of the image written. @default the input header's BUNIT, if any */
  unit?: string;
  /** Software version for the SKYSVER card. @default none */
  softwareVersion?: string;
  /** Digest (e.g. SHA-256 hex) of the settings that produced the image, for the SETDIGST card. @default none */
  settingsDigest?: string;
}

/** WCS keywords of axes 1–2 (optionally with an alternate-description letter), papers I and II. */
const WCS_KEYWORD =
  /^(CTYPE|CRPIX|CRVAL|CDELT|CUNIT|CROTA|CRDER|CSYER|CNAME)[12][A-Z]?$|^(PC|CD)[12]_[12][A-Z]?$|^PV[12]_\d{1,2}[A-Z]?$|^PS[12]_\d{1,2}[A-Z]?$|^(RADESYS|RADECSYS|EQUINOX|EPOCH|LONPOLE|LATPOLE|WCSNAME|MJD-OBS|DATE-OBS|MJD-AVG|DATE-AVG|RESTFRQ|RESTFREQ|RESTWAV|SPECSYS|OBSGEO-[XYZ])[A-Z]?$/;
const BEAM_KEYWORD = /^(BMAJ|BMIN|BPA)$/;
const OBSERVATION_KEYWORD = /^(OBJECT|TELESCOP|INSTRUME|OBSERVER)$/;

/** The cards of `header` that describe the sky position, the beam and the observation. */
export function carriedCards(header: readonly HeaderCard[]): HeaderCard[] {
  return header.filter(
    (card) =>
      card.value !== undefined &&
      card.value !== null &&
      (WCS_KEYWORD.test(card.keyword) ||
        BEAM_KEYWORD.test(card.keyword) ||
        OBSERVATION_KEYWORD.test(card.keyword)),
  );
}

/** Writes a single-HDU FITS file with BITPIX = −32. */
export function writeFits(image: WriteFitsImage, options: WriteFitsOptions = {}): Uint8Array {
  const { width, height, data, mask } = image;
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 1 || height < 1) {
    throw new RangeError(`Image size must be positive integers, got ${width}×${height}`);
  }
  if (data.length !== width * height) {
    throw new RangeError(`data has ${data.length} values, expected ${width}×${height} = ${width * height}`);
  }
  if (mask && mask.length !== data.length) {
    throw new RangeError(`mask has ${mask.length} values, expected ${data.length}`);
  }
  const input = options.header ?? [];
  const unit =
    options.unit ?? input.find((card) => card.keyword === 'BUNIT' && typeof card.value === 'string')?.value;
  const cards: HeaderCard[] = [
    { keyword: 'SIMPLE', value: true, comment: 'conforms to the FITS Standard 4.0' },
    { keyword: 'BITPIX', value: -32, comment: 'IEEE 754 single precision' },
    { keyword: 'NAXIS', value: 2 },
    { keyword: 'NAXIS1', value: width },
    { keyword: 'NAXIS2', value: height },
    ...carriedCards(input),
  ];
  if (typeof unit === 'string' && unit !== '') cards.push({ keyword: 'BUNIT', value: unit });
  cards.push({ keyword: 'ORIGIN', value: 'Skysieve', comment: 'software that wrote this file' });
  if (options.softwareVersion) {
    cards.push({ keyword: 'SKYSVER', value: options.softwareVersion, comment: 'Skysieve version' });
  }
  if (options.settingsDigest) {
    cards.push({ keyword: 'SETDIGST', value: options.settingsDigest, comment: 'digest of the run settings' });
  }
  cards.push(...(options.cards ?? []));

  const headerBytes = formatHeader(cards);
  const dataBytes = Math.ceil((4 * data.length) / BLOCK_BYTES) * BLOCK_BYTES;
  const out = new Uint8Array(headerBytes.length + dataBytes);
  out.set(headerBytes);
  const view = new DataView(out.buffer, headerBytes.length, 4 * data.length);
  for (let i = 0; i < data.length; i++) {
    const value = data[i] as number;
    view.setFloat32(4 * i, mask && mask[i] === 0 ? NaN : Number.isFinite(value) ? value : NaN);
  }
  return out;
}
