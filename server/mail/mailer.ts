/**
 * Outgoing e-mail through nodemailer. Messages are sent in the background (a slow or failing SMTP server
 * never delays or breaks the request, and answer times do not reveal whether an account exists);
 * `idle()` waits for everything queued so far (tests, shutdown).
 */
import nodemailer, { type Transporter } from 'nodemailer';

export interface OutgoingMail {
  to: string;
  subject: string;
  text: string;
  html?: string;
}

export interface Mailer {
  /** Queues a message; never throws. */
  send(mail: OutgoingMail): void;
  /** Resolves when every message queued so far was handed to the SMTP server (or failed and was logged). */
  idle(): Promise<void>;
  close(): void;
}

export interface SmtpSettings {
  host: string;
  port: number;
  secure: boolean;
  user?: string;
  password?: string;
  from: string;
}

export function createSmtpMailer(settings: SmtpSettings, logError: (error: unknown) => void): Mailer {
  const transport: Transporter = nodemailer.createTransport({
    host: settings.host,
    port: settings.port,
    secure: settings.secure,
    auth: settings.user ? { user: settings.user, pass: settings.password ?? '' } : undefined,
    // The development receiver on loopback offers no TLS certificate worth checking.
    ignoreTLS: settings.host === '127.0.0.1' && !settings.secure,
  });
  const pending = new Set<Promise<void>>();
  return {
    send(mail) {
      const delivery: Promise<void> = transport
        .sendMail({ from: settings.from, ...mail })
        .then(() => undefined)
        .catch((error: unknown) => logError(error))
        .finally(() => pending.delete(delivery));
      pending.add(delivery);
    },
    async idle() {
      while (pending.size > 0) await Promise.all([...pending]);
    },
    close() {
      transport.close();
    },
  };
}
