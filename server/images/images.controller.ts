import type { IncomingHttpHeaders } from 'node:http';
import { readFile } from 'node:fs/promises';

import type { Response } from 'express';

import { type RenameImageRequest, uploadImageFieldsSchema } from '../../shared/images';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { badRequest } from '../http/app-error';
import { currentUser } from '../http/guards';
import { projectAccessOf } from '../projects/project-access';
import { imageOf } from './image-access';
import { missingFileMessage } from './receive-upload';
import * as images from './images.service';

type IdParams = { id: number };

const contentTypes: Record<string, string> = {
  fits: 'application/fits',
  tiff: 'image/tiff',
  png: 'image/png',
  jpeg: 'image/jpeg',
};

/** Revalidate on every use (access can change) but let an unchanged image answer 304. */
function cacheable(req: { headers: IncomingHttpHeaders }, res: Response, etag: string): boolean {
  res.setHeader('ETag', etag);
  res.setHeader('Cache-Control', 'private, no-cache');
  const match = req.headers['if-none-match'];
  if (match && match.split(',').some((tag) => tag.trim() === etag || tag.trim() === '*')) {
    res.status(304).end();
    return true;
  }
  return false;
}

export function imagesController(ctx: AppContext) {
  return {
    async upload(req: ApiRequest<unknown, IdParams>, res: Response) {
      const file = req.file;
      if (!file) throw badRequest(missingFileMessage);
      const fields = uploadImageFieldsSchema.safeParse(req.body ?? {});
      if (!fields.success)
        throw badRequest(fields.error.issues[0]?.message ?? 'The upload fields are not valid.');
      const bytes = new Uint8Array(await readFile(file.path));
      const summary = await images.uploadImage(
        currentUser(req),
        projectAccessOf(req).project.id,
        { path: file.path, bytes, originalName: file.originalname },
        { ...fields.data, maxPixels: ctx.config.maxImagePixels },
      );
      res.status(201).json(summary);
    },
    async list(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await images.listImages(projectAccessOf(req).project.id));
    },
    async show(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await images.imageDetail(imageOf(req).id));
    },
    async rename(req: ApiRequest<RenameImageRequest, IdParams>, res: Response) {
      res.json(await images.renameImage(imageOf(req).id, req.body.name));
    },
    async remove(req: ApiRequest<unknown, IdParams>, res: Response) {
      await images.deleteImage(imageOf(req).id);
      res.status(204).end();
    },
    async thumbnail(req: ApiRequest<unknown, IdParams>, res: Response) {
      const image = imageOf(req);
      if (cacheable(req, res, `"thumb-${image.contentSha256.slice(0, 32)}"`)) return;
      res.type('image/png').send(await images.thumbnailBytes(image.id));
    },
    async original(req: ApiRequest<unknown, IdParams>, res: Response) {
      const image = imageOf(req);
      const bytes = await images.originalBytes(image.id);
      // attachment() guesses a type from the file name; set ours after it (FITS: application/fits, RFC 4047).
      res.attachment(image.originalFileName || `image-${image.id}`);
      res.type(
        image.gzipped ? 'application/gzip' : (contentTypes[image.format] ?? 'application/octet-stream'),
      );
      res.setHeader('Cache-Control', 'private, no-cache');
      res.send(bytes);
    },
    async pixels(req: ApiRequest<unknown, IdParams, { maxSize: number }>, res: Response) {
      const image = imageOf(req);
      const maxSize = req.query.maxSize;
      if (cacheable(req, res, `"pixels-v1-${image.contentSha256.slice(0, 32)}-${maxSize}"`)) return;
      res.type('application/octet-stream').send(Buffer.from(await images.pixelView(image, maxSize)));
    },
  };
}
