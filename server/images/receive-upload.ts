/**
 * Receives the multipart upload (multer 2): the field `file` streamed to a temporary file in os.tmpdir(), at most
 * `uploadMaxBytes`; text fields (name, plane) land in req.body.
 * The temporary file is removed when the response ends, whatever happened (multer itself removes partial files
 * when it refuses an upload or the client goes away).
 */
import { randomBytes } from 'node:crypto';
import { rmSync } from 'node:fs';
import { tmpdir } from 'node:os';

import type { RequestHandler } from 'express';
import multer from 'multer';

import { formatBytes } from '../engine/io/sky-image';
import { AppError, badRequest } from '../http/app-error';

/** Uploads wait in os.tmpdir() under this name prefix (one per process, so tests can check nothing is left). */
export function uploadFilePrefix(): string {
  return `skysieve-upload-${process.pid}-`;
}

export const missingFileMessage = 'Send the image as multipart/form-data with the file in the field "file".';

export function tooLargeMessage(limit: number, requestBytes: number | undefined): string {
  return requestBytes !== undefined && requestBytes > limit
    ? `The file is ${formatBytes(requestBytes)}; the upload limit is ${formatBytes(limit)}.`
    : `The file is larger than the upload limit of ${formatBytes(limit)}.`;
}

export function receiveUpload(uploadMaxBytes: number): RequestHandler {
  const upload = multer({
    storage: multer.diskStorage({
      destination: tmpdir(),
      filename(_req, _file, callback) {
        callback(null, `${uploadFilePrefix()}${randomBytes(12).toString('hex')}`);
      },
    }),
    limits: { fileSize: uploadMaxBytes, files: 1, fields: 10, fieldSize: 4096, parts: 12 },
    defParamCharset: 'utf8',
  }).single('file');

  return (req, res, next) => {
    const declared = Number(req.headers['content-length']);
    const requestBytes = Number.isFinite(declared) && declared > 0 ? declared : undefined;
    upload(req, res, (error: unknown) => {
      if (req.file) {
        const temporary = req.file.path;
        res.once('close', () => rmSync(temporary, { force: true }));
      }
      if (error instanceof multer.MulterError) {
        if (error.code === 'LIMIT_FILE_SIZE') {
          next(
            new AppError('payload_too_large', tooLargeMessage(uploadMaxBytes, requestBytes), {
              limitBytes: uploadMaxBytes,
            }),
          );
        } else if (error.code === 'LIMIT_UNEXPECTED_FILE' || error.code === 'LIMIT_FILE_COUNT') {
          next(badRequest('Send exactly one image, in the field "file".'));
        } else next(badRequest(`The upload could not be read (${error.message}).`));
        return;
      }
      if (error) {
        next(badRequest('The upload could not be read: the multipart data are incomplete or malformed.'));
        return;
      }
      if (!req.file) {
        next(badRequest(missingFileMessage));
        return;
      }
      next();
    });
  };
}
