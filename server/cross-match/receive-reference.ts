/**
 * Receives a reference catalogue file: multipart/form-data with the file in the field `file` (text fields beside
 * it, e.g. name, mapping), or the file itself as the request body with a text Content-Type (text/csv,
 * text/plain, text/xml, application/xml, application/x-votable+xml). Either way at most `maxBytes`, kept in
 * memory (a catalogue is small next to an image); the result sits in res.locals.referenceFile.
 */
import express, { type RequestHandler, type Response } from 'express';
import multer from 'multer';

import { AppError, badRequest } from '../http/app-error';
import { tooLargeMessage } from '../images/receive-upload';

export interface ReceivedReferenceFile {
  bytes: Buffer;
  /** The multipart file name, or null for a raw body. */
  originalName: string | null;
  /** Text fields of a multipart upload (raw bodies carry their options in the query string). */
  fields: Record<string, string>;
}

export const missingReferenceMessage =
  'Send the catalogue as multipart/form-data with the file in the field "file", or as the request body with ' +
  'Content-Type text/csv or application/x-votable+xml.';

const TEXT_TYPES = ['text/csv', 'text/plain', 'text/xml', 'application/xml', 'application/x-votable+xml'];

export function receiveReferenceFile(maxBytes: number): RequestHandler {
  const multipart = multer({
    storage: multer.memoryStorage(),
    limits: { fileSize: maxBytes, files: 1, fields: 10, fieldSize: 8192, parts: 12 },
    defParamCharset: 'utf8',
  }).single('file');
  const raw = express.raw({ type: () => true, limit: maxBytes });

  return (req, res, next) => {
    const declared = Number(req.headers['content-length']);
    const requestBytes = Number.isFinite(declared) && declared > 0 ? declared : undefined;
    const tooLarge = () =>
      new AppError('payload_too_large', tooLargeMessage(maxBytes, requestBytes), { limitBytes: maxBytes });
    const type = (req.headers['content-type'] ?? '').split(';')[0]!.trim().toLowerCase();

    if (type === 'multipart/form-data') {
      multipart(req, res, (error: unknown) => {
        if (error instanceof multer.MulterError) {
          if (error.code === 'LIMIT_FILE_SIZE') return next(tooLarge());
          if (error.code === 'LIMIT_UNEXPECTED_FILE' || error.code === 'LIMIT_FILE_COUNT')
            return next(badRequest('Send exactly one catalogue file, in the field "file".'));
          return next(badRequest(`The upload could not be read (${error.message}).`));
        }
        if (error)
          return next(
            badRequest('The upload could not be read: the multipart data are incomplete or malformed.'),
          );
        if (!req.file) return next(badRequest(missingReferenceMessage));
        const fields: Record<string, string> = {};
        for (const [key, value] of Object.entries((req.body ?? {}) as Record<string, unknown>))
          if (typeof value === 'string') fields[key] = value;
        setReceived(res, { bytes: req.file.buffer, originalName: req.file.originalname, fields });
        next();
      });
      return;
    }
    if (!TEXT_TYPES.includes(type)) return next(badRequest(missingReferenceMessage));
    raw(req, res, (error: unknown) => {
      if (error && typeof error === 'object' && (error as { type?: string }).type === 'entity.too.large')
        return next(tooLarge());
      if (error) return next(badRequest('The request body could not be read.'));
      const bytes = Buffer.isBuffer(req.body) ? req.body : Buffer.alloc(0);
      // The parsed body is the file, not a set of fields: keep body validation away from it.
      req.body = {};
      setReceived(res, { bytes, originalName: null, fields: {} });
      next();
    });
  };
}

function setReceived(res: Response, file: ReceivedReferenceFile): void {
  res.locals.referenceFile = file;
}

export function referenceFileOf(res: Response): ReceivedReferenceFile {
  const file = res.locals.referenceFile as ReceivedReferenceFile | undefined;
  if (!file) throw new Error('receiveReferenceFile() must run before this handler.');
  return file;
}
