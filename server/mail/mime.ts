/**
 * A small reader for the messages our own mailer sends (RFC 5322 headers, RFC 2045/2046 MIME parts,
 * RFC 2047 encoded words, quoted-printable and base64 bodies, UTF-8). Good enough for the development
 * inbox; the raw message is always kept beside it.
 */

export interface ParsedMail {
  from: string;
  to: string;
  subject: string;
  text: string;
  html: string | null;
}

interface Part {
  headers: Map<string, string>;
  body: string;
}

function splitHeaders(raw: string): Part {
  const normalised = raw.replace(/\r\n/g, '\n');
  const end = normalised.indexOf('\n\n');
  const head = end === -1 ? normalised : normalised.slice(0, end);
  const body = end === -1 ? '' : normalised.slice(end + 2);
  const headers = new Map<string, string>();
  // Unfold continuation lines (RFC 5322 §2.2.3), then split name: value.
  for (const line of head.replace(/\n[ \t]+/g, ' ').split('\n')) {
    const colon = line.indexOf(':');
    if (colon <= 0) continue;
    const name = line.slice(0, colon).trim().toLowerCase();
    if (!headers.has(name)) headers.set(name, line.slice(colon + 1).trim());
  }
  return { headers, body };
}

function parameter(header: string | undefined, name: string): string | undefined {
  if (!header) return undefined;
  const match = new RegExp(`;\\s*${name}\\s*=\\s*(?:"([^"]*)"|([^;\\s]+))`, 'i').exec(header);
  return match ? (match[1] ?? match[2]) : undefined;
}

function decodeQuotedPrintable(text: string): Buffer {
  const joined = text.replace(/=\r?\n/g, '');
  const bytes: number[] = [];
  for (let i = 0; i < joined.length; i++) {
    const char = joined[i];
    const hex = joined.slice(i + 1, i + 3);
    if (char === '=' && /^[0-9A-Fa-f]{2}$/.test(hex)) {
      bytes.push(Number.parseInt(hex, 16));
      i += 2;
    } else {
      bytes.push(...Buffer.from(char ?? '', 'utf8'));
    }
  }
  return Buffer.from(bytes);
}

function decodeBody(part: Part): string {
  const encoding = (part.headers.get('content-transfer-encoding') ?? '7bit').toLowerCase();
  if (encoding === 'base64') return Buffer.from(part.body.replace(/\s+/g, ''), 'base64').toString('utf8');
  if (encoding === 'quoted-printable') return decodeQuotedPrintable(part.body).toString('utf8');
  return part.body;
}

/** RFC 2047 encoded words: =?charset?Q|B?text?= (UTF-8 and ASCII charsets). */
export function decodeEncodedWords(value: string): string {
  return value
    .replace(/\?=\s+=\?/g, '?==?')
    .replace(/=\?([^?]+)\?([QqBb])\?([^?]*)\?=/g, (_whole, _charset: string, kind: string, text: string) => {
      if (kind.toUpperCase() === 'B') return Buffer.from(text, 'base64').toString('utf8');
      return decodeQuotedPrintable(text.replace(/_/g, ' ')).toString('utf8');
    });
}

function collectParts(part: Part, into: { text?: string; html?: string }): void {
  const type = (part.headers.get('content-type') ?? 'text/plain').toLowerCase();
  if (type.startsWith('multipart/')) {
    const boundary = parameter(part.headers.get('content-type'), 'boundary');
    if (!boundary) return;
    const sections = part.body.split(`--${boundary}`);
    // Skip the preamble (before the first boundary) and the epilogue (after the closing "--").
    for (const section of sections.slice(1)) {
      if (section.startsWith('--')) break;
      collectParts(splitHeaders(section.replace(/^\n/, '')), into);
    }
    return;
  }
  const disposition = (part.headers.get('content-disposition') ?? '').toLowerCase();
  if (disposition.startsWith('attachment')) return;
  if (type.startsWith('text/html')) into.html ??= decodeBody(part).replace(/\n$/, '');
  else if (type.startsWith('text/plain')) into.text ??= decodeBody(part).replace(/\n$/, '');
}

export function parseMail(raw: string): ParsedMail {
  const top = splitHeaders(raw);
  const bodies: { text?: string; html?: string } = {};
  collectParts(top, bodies);
  return {
    from: decodeEncodedWords(top.headers.get('from') ?? ''),
    to: decodeEncodedWords(top.headers.get('to') ?? ''),
    subject: decodeEncodedWords(top.headers.get('subject') ?? ''),
    text: bodies.text ?? '',
    html: bodies.html ?? null,
  };
}
