// @vitest-environment node
/**
 * The development inbox's MIME reader against messages composed by nodemailer's own MailComposer
 * (an independent encoder: RFC 2047 subjects, quoted-printable and base64 bodies, multipart/alternative,
 * attachments).
 */
import MailComposer from 'nodemailer/lib/mail-composer';
import { describe, expect, it } from 'vitest';

import { decodeEncodedWords, parseMail } from '../../server/mail/mime';

async function compose(options: ConstructorParameters<typeof MailComposer>[0]): Promise<string> {
  const buffer = await new MailComposer(options).compile().build();
  return buffer.toString('utf8');
}

describe('parseMail', () => {
  it('reads a plain text message with an encoded non-ASCII subject', async () => {
    const raw = await compose({
      from: 'Skysieve <no-reply@skysieve.invalid>',
      to: 'ana@example.org',
      subject: 'Projekt „Lyra Süd“ – Einladung ✓',
      text: 'Grüße aus dem Lyra-Feld.\nZweite Zeile mit = Zeichen.',
    });
    expect(raw).toMatch(/Subject: =\?UTF-8\?/);
    const parsed = parseMail(raw);
    expect(parsed.subject).toBe('Projekt „Lyra Süd“ – Einladung ✓');
    expect(parsed.from).toBe('Skysieve <no-reply@skysieve.invalid>');
    expect(parsed.to).toBe('ana@example.org');
    expect(parsed.text.replace(/\r\n/g, '\n')).toBe('Grüße aus dem Lyra-Feld.\nZweite Zeile mit = Zeichen.');
    expect(parsed.html).toBeNull();
  });
  it('reads both parts of multipart/alternative and skips attachments', async () => {
    const longLine = 'A long line '.repeat(20).trim();
    const raw = await compose({
      from: 'a@example.org',
      to: 'b@example.org, c@example.org',
      subject: 'Plain subject',
      text: `Hello\n${longLine}`,
      html: '<p>Hello <a href="http://example.org/reset/abc_DEF-123">link</a></p>',
      attachments: [{ filename: 'notes.txt', content: 'attachment body, not the message text' }],
    });
    const parsed = parseMail(raw);
    expect(parsed.to).toBe('b@example.org, c@example.org');
    expect(parsed.text.replace(/\r\n/g, '\n')).toBe(`Hello\n${longLine}`);
    expect(parsed.html).toBe('<p>Hello <a href="http://example.org/reset/abc_DEF-123">link</a></p>');
  });
  it('decodes base64 bodies (nodemailer picks base64 for mostly non-ASCII text)', async () => {
    const text = 'Ωμέγα Κενταύρου — ☉ ☾ ★ '.repeat(5).trim();
    const raw = await compose({ from: 'a@example.org', to: 'b@example.org', subject: 's', text });
    expect(raw).toMatch(/Content-Transfer-Encoding: base64/i);
    expect(parseMail(raw).text).toBe(text);
  });
  it('decodes RFC 2047 words: Q with underscores and B, adjacent words joined', () => {
    // Constructed in the form RFC 2047 §4 defines (encoded-word = "=?" charset "?" encoding "?" text "?=").
    expect(decodeEncodedWords('=?UTF-8?Q?Caf=C3=A9_au_lait?=')).toBe('Café au lait');
    expect(decodeEncodedWords('=?UTF-8?B?U2t5c2lldmU=?= =?UTF-8?B?IHRlc3Q=?=')).toBe('Skysieve test');
    expect(decodeEncodedWords('no encoding here')).toBe('no encoding here');
  });
});
