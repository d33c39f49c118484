import type { DevMailMessage, DevMailSummary } from '../../shared/admin';
import { BaseModel, isoDate } from './base-model';

/** A message caught by the development SMTP receiver. */
export class DevMail extends BaseModel {
  static override tableName = 'dev_mail';
  static override hasUpdatedAt = false;

  id!: number;
  envelopeFrom!: string;
  envelopeTo!: string;
  fromHeader!: string;
  toHeader!: string;
  subject!: string;
  text!: string;
  html!: string | null;
  raw!: string;
  receivedAt!: Date;

  override $beforeInsert(): void {
    this.receivedAt ??= new Date();
  }

  toSummary(): DevMailSummary {
    return {
      id: this.id,
      to: this.toHeader || this.envelopeTo,
      from: this.fromHeader || this.envelopeFrom,
      subject: this.subject,
      receivedAt: isoDate(this.receivedAt),
    };
  }

  toMessage(): DevMailMessage {
    return { ...this.toSummary(), text: this.text, html: this.html };
  }
}
