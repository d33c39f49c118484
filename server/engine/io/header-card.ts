/**
 * FITS header cards: parsing 80-character records and formatting them back.
 *
 * Follows the FITS Standard 4.0 (IAU FITS Working Group, 2018), section 4:
 * - a card is 80 ASCII characters; the keyword fills columns 1–8, the value indicator "= " columns 9–10;
 * - fixed-format values: logical T/F in column 30, integers and reals right-justified to column 30,
 *   strings opening with a quote in column 11 and at least 8 characters between the quotes;
 *   free-format values (anywhere in columns 11–80) are read as well;
 * - a quote inside a string is written twice; trailing blanks in a string are not significant;
 * - reals may use an E or D exponent;
 * - commentary cards (COMMENT, HISTORY, blank keyword, or any card without "= ") carry text in columns 9–80;
 * - long strings use the CONTINUE convention (Standard 4.0, section 4.2.1.2): a string ending in "&" is
 *   continued by the string on the next CONTINUE card.
 * A header is a sequence of 2880-byte blocks (36 cards each) ending with the END card, padded with blanks.
 */

/** FITS logical record length (Standard 4.0, section 3.1). */
export const BLOCK_BYTES = 2880;
/** Card length (Standard 4.0, section 4.1). */
export const CARD_BYTES = 80;

export interface HeaderCard {
  /** Keyword, upper case and right-trimmed; '' for a blank-keyword commentary card. */
  keyword: string;
  /**
   * The value: string, logical, integer or real; null for an undefined value (keyword with "= " and nothing after).
   * Absent on commentary cards (COMMENT, HISTORY, blank keyword and cards without a value indicator).
   * Complex values are kept as their text, e.g. '(1.0, 2.0)'.
   */
  value?: string | number | boolean | null;
  /** The comment after the slash, or the whole text of a commentary card. */
  comment?: string;
  /** True when a numeric value is a real (it had a decimal point or exponent); keeps 1.0 a real when rewritten. */
  real?: boolean;
}

/** Keywords whose cards carry text, not a value (Standard 4.0, section 4.4.2.4). */
const COMMENTARY = new Set(['COMMENT', 'HISTORY', '']);

const INTEGER = /^[+-]?\d+$/;
const REAL = /^[+-]?(\d+\.?\d*|\.\d+)([EeDd][+-]?\d+)?$/;
const COMPLEX = /^\(\s*[^,]+,\s*[^)]+\)$/;

/** Reads one 80-character card (already decoded as text). CONTINUE cards are returned as they are. */
export function parseCard(text: string): HeaderCard {
  const keyword = text.slice(0, 8).trimEnd().toUpperCase();
  if (keyword === 'HIERARCH') return parseHierarch(text);
  const hasValue = text.slice(8, 10) === '= ' && !COMMENTARY.has(keyword);
  // CONTINUE has no value indicator but a string value from column 11 (Standard 4.0, section 4.2.1.2).
  const isContinue = keyword === 'CONTINUE';
  if (!hasValue && !isContinue) {
    return { keyword, comment: text.slice(8).trimEnd() };
  }
  const parsed = parseValueField(text.slice(10));
  if (isContinue && typeof parsed.value !== 'string') return { keyword, comment: text.slice(8).trimEnd() };
  return { keyword, ...parsed };
}

/** ESO HIERARCH convention: "HIERARCH A B C = value / comment"; the keyword becomes 'HIERARCH A B C'. */
function parseHierarch(text: string): HeaderCard {
  const equals = text.indexOf('=', 9);
  if (equals < 0) return { keyword: 'HIERARCH', comment: text.slice(8).trimEnd() };
  const keyword = `HIERARCH ${text.slice(9, equals).trim().toUpperCase()}`;
  return { keyword, ...parseValueField(text.slice(equals + 1)) };
}

/** Parses the value/comment field (columns 11–80). */
function parseValueField(field: string): Omit<HeaderCard, 'keyword'> {
  let i = 0;
  while (i < field.length && field[i] === ' ') i++;
  if (field[i] === "'") {
    let value = '';
    let j = i + 1;
    for (; j < field.length; j++) {
      const ch = field[j];
      if (ch === "'") {
        if (field[j + 1] === "'") {
          value += "'";
          j++;
        } else break;
      } else value += ch;
    }
    const rest = field.slice(j + 1);
    const slash = rest.indexOf('/');
    const card: Omit<HeaderCard, 'keyword'> = { value: value.trimEnd() };
    if (slash >= 0) card.comment = rest.slice(slash + 1).trim();
    return card;
  }
  const slash = field.indexOf('/', i);
  const valueText = (slash >= 0 ? field.slice(i, slash) : field.slice(i)).trim();
  const card: Omit<HeaderCard, 'keyword'> = { value: null };
  if (slash >= 0) card.comment = field.slice(slash + 1).trim();
  if (valueText === '') return card;
  if (valueText === 'T' || valueText === 'F') card.value = valueText === 'T';
  else if (INTEGER.test(valueText)) card.value = Number(valueText);
  else if (REAL.test(valueText)) {
    card.value = Number(valueText.replace(/[Dd]/, 'E'));
    card.real = true;
  } else if (COMPLEX.test(valueText)) card.value = valueText;
  else card.value = valueText; // not a valid FITS value: keep the text rather than lose it
  return card;
}

/** Longest header searched for its END card: 10,000 blocks (360,000 cards, 28.8 MB), far beyond real headers. */
export const MAX_HEADER_BLOCKS = 10_000;

/**
 * Parses header cards from `bytes` starting at `offset` until the END card.
 * Joins CONTINUE long strings into the card they continue.
 * Returns null when no END card is found before the end of the bytes or within `maxBlocks` blocks.
 */
export function parseHeader(
  bytes: Uint8Array,
  offset: number,
  maxBlocks = MAX_HEADER_BLOCKS,
): { cards: HeaderCard[]; dataOffset: number } | null {
  const cards: HeaderCard[] = [];
  let continuing: HeaderCard | null = null;
  const end = Math.min(bytes.length, offset + maxBlocks * BLOCK_BYTES);
  for (let at = offset; at + CARD_BYTES <= end; at += CARD_BYTES) {
    const text = decodeAscii(bytes, at, CARD_BYTES);
    if (text.startsWith('END') && text.slice(3).trim() === '') {
      const headerBytes = at + CARD_BYTES - offset;
      return { cards, dataOffset: offset + Math.ceil(headerBytes / BLOCK_BYTES) * BLOCK_BYTES };
    }
    const card = parseCard(text);
    if (card.keyword === 'CONTINUE' && continuing && typeof card.value === 'string') {
      const previous = continuing.value as string;
      continuing.value = previous.slice(0, -1) + card.value;
      if (card.comment) continuing.comment = [continuing.comment, card.comment].filter(Boolean).join(' ');
      if (!card.value.endsWith('&')) continuing = null;
      continue;
    }
    continuing = typeof card.value === 'string' && card.value.endsWith('&') ? card : null;
    cards.push(card);
  }
  return null;
}

/** Decodes bytes as ASCII, mapping anything outside 32–126 to a blank (the Standard allows only those). */
function decodeAscii(bytes: Uint8Array, start: number, length: number): string {
  let text = '';
  for (let i = start; i < start + length; i++) {
    const code = bytes[i] ?? 32;
    text += code >= 32 && code <= 126 ? String.fromCharCode(code) : ' ';
  }
  return text;
}

/** First card with this keyword (upper case), or undefined. */
export function findCard(cards: readonly HeaderCard[], keyword: string): HeaderCard | undefined {
  return cards.find((card) => card.keyword === keyword && card.value !== undefined);
}

/** Numeric value of a keyword, or undefined when absent or not a number. */
export function cardNumber(cards: readonly HeaderCard[], keyword: string): number | undefined {
  const value = findCard(cards, keyword)?.value;
  return typeof value === 'number' ? value : undefined;
}

/** String value of a keyword, or undefined when absent or not a string. */
export function cardString(cards: readonly HeaderCard[], keyword: string): string | undefined {
  const value = findCard(cards, keyword)?.value;
  return typeof value === 'string' ? value : undefined;
}

/** Formats a real so that it reads back as the same double: shortest round-trip digits, upper-case E exponent. */
export function formatReal(x: number): string {
  if (!Number.isFinite(x)) throw new RangeError(`FITS header values must be finite, got ${x}`);
  let text = String(x).toUpperCase();
  const [mantissa = '', exponent] = text.split('E');
  const withPoint = mantissa.includes('.') ? mantissa : `${mantissa}.0`;
  text =
    exponent === undefined
      ? withPoint
      : `${withPoint}E${exponent.startsWith('-') ? '-' : '+'}${exponent.replace(/^[+-]/, '')}`;
  return text;
}

/** Quotes a string value, doubling inner quotes; the closing quote at column 20 or later (Standard 4.0, 4.2.1.1). */
function quote(text: string): string {
  return `'${text.replace(/'/g, "''").padEnd(8)}'`;
}

/**
 * Formats one logical card as one or more 80-character records.
 * Strings longer than a card are split with the CONTINUE convention; long commentary text becomes several cards.
 * Throws RangeError for keywords that are not 1–8 characters of A–Z, 0–9, '-', '_'.
 */
export function formatCard(card: HeaderCard): string[] {
  const keyword = card.keyword.toUpperCase();
  if (!/^[A-Z0-9_-]{0,8}$/.test(keyword)) throw new RangeError(`Invalid FITS keyword '${card.keyword}'`);
  if (card.value === undefined) {
    const text = card.comment ?? '';
    const records: string[] = [];
    for (let at = 0; at === 0 || at < text.length; at += 72) {
      records.push((keyword.padEnd(8) + text.slice(at, at + 72)).padEnd(CARD_BYTES));
    }
    return records;
  }
  const comment = card.comment ? ` / ${card.comment}` : '';
  if (typeof card.value === 'string' && !COMPLEX.test(card.value))
    return formatString(keyword, card.value, comment);
  let valueText: string;
  if (card.value === null) valueText = '';
  else if (typeof card.value === 'boolean') valueText = (card.value ? 'T' : 'F').padStart(20);
  else if (typeof card.value === 'string') valueText = card.value.padStart(20);
  else {
    const integral = Number.isSafeInteger(card.value) && !card.real;
    valueText = (integral ? String(card.value) : formatReal(card.value)).padStart(20);
  }
  return [`${keyword.padEnd(8)}= ${valueText}${comment}`.slice(0, CARD_BYTES).padEnd(CARD_BYTES)];
}

/** A string card, continued over CONTINUE cards when it does not fit (quotes counted after doubling). */
function formatString(keyword: string, value: string, comment: string): string[] {
  const single = `${keyword.padEnd(8)}= ${quote(value)}`;
  if (single.length <= CARD_BYTES) return [(single + comment).slice(0, CARD_BYTES).padEnd(CARD_BYTES)];
  // Split into pieces whose quoted form (with a trailing '&') fits in columns 11–80: at most 67 characters
  // after quote doubling; never split a doubled quote.
  const pieces: string[] = [];
  let rest = value;
  while (rest.length > 0) {
    let take = 0;
    let width = 0;
    while (take < rest.length) {
      const w = rest[take] === "'" ? 2 : 1;
      if (width + w > 67) break;
      width += w;
      take++;
    }
    pieces.push(rest.slice(0, take));
    rest = rest.slice(take);
  }
  return pieces.map((piece, index) => {
    const last = index === pieces.length - 1;
    const text = `'${piece.replace(/'/g, "''")}${last ? '' : '&'}'`;
    const head = index === 0 ? `${keyword.padEnd(8)}= ` : 'CONTINUE  ';
    return (head + text + (last ? comment : '')).slice(0, CARD_BYTES).padEnd(CARD_BYTES);
  });
}

/** Pads a byte array with `fill` up to a whole number of 2880-byte blocks (blanks for headers, zeros for data). */
export function padToBlock(bytes: Uint8Array, fill = 0): Uint8Array {
  const padded = new Uint8Array(Math.ceil(bytes.length / BLOCK_BYTES) * BLOCK_BYTES);
  padded.set(bytes);
  padded.fill(fill, bytes.length);
  return padded;
}

/** Formats cards plus the END card into header bytes padded with blanks to whole blocks. */
export function formatHeader(cards: readonly HeaderCard[]): Uint8Array {
  const text = cards.flatMap(formatCard).join('') + 'END'.padEnd(CARD_BYTES);
  const bytes = new Uint8Array(text.length);
  for (let i = 0; i < text.length; i++) {
    const code = text.charCodeAt(i);
    bytes[i] = code >= 32 && code <= 126 ? code : 63; // '?' for anything the Standard does not allow
  }
  return padToBlock(bytes, 32);
}
