/**
 * The development and test mail service: a real SMTP receiver (smtp-server) on 127.0.0.1 that stores
 * every message it accepts in the dev_mail table, where admins (Admin → Mail) and tests read it.
 * The SMTP "250 OK" is only sent after the row is written.
 */
import type { AddressInfo } from 'node:net';

import { SMTPServer } from 'smtp-server';

import { DevMail } from '../models/dev-mail';
import { parseMail } from './mime';

export interface DevMailServer {
  port: number;
  close(): Promise<void>;
}

const maxMessageBytes = 10 * 1024 * 1024;

export async function startDevMailServer(
  port: number,
  logError: (error: unknown) => void,
): Promise<DevMailServer> {
  const server = new SMTPServer({
    // Loopback only, no TLS and no login: this receiver never talks to the outside.
    secure: false,
    disabledCommands: ['STARTTLS', 'AUTH'],
    authOptional: true,
    banner: 'Skysieve development mail receiver',
    size: maxMessageBytes,
    logger: false,
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (chunk: Buffer) => chunks.push(chunk));
      stream.on('end', () => {
        const raw = Buffer.concat(chunks).toString('utf8');
        const parsed = parseMail(raw);
        const envelopeFrom = session.envelope.mailFrom ? session.envelope.mailFrom.address : '';
        const envelopeTo = session.envelope.rcptTo.map((recipient) => recipient.address).join(', ');
        DevMail.query()
          .insert({
            envelopeFrom,
            envelopeTo,
            fromHeader: parsed.from,
            toHeader: parsed.to,
            subject: parsed.subject,
            text: parsed.text,
            html: parsed.html,
            raw,
          })
          .then(() => callback())
          .catch((error: unknown) => {
            logError(error);
            callback(new Error('Could not store the message'));
          });
      });
    },
  });
  server.on('error', logError);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => resolve());
  });
  const address = server.server.address() as AddressInfo;
  return {
    port: address.port,
    close: () => new Promise<void>((resolve) => server.close(() => resolve())),
  };
}
