import {
  imageDetailSchema,
  imageIdParamsSchema,
  imageListSchema,
  imageSummarySchema,
  pixelViewQuerySchema,
  renameImageRequestSchema,
} from '../../shared/images';
import { projectIdParamsSchema } from '../../shared/projects';
import type { AppContext } from '../context';
import { type AnyRouteSpec, defineRoute, errors } from '../http/api-route';
import { loadProject } from '../projects/project-access';
import { loadImage } from './image-access';
import { imagesController } from './images.controller';
import { receiveUpload } from './receive-upload';

export function imageRoutes(ctx: AppContext): AnyRouteSpec[] {
  const controller = imagesController(ctx);
  const tag = 'Images';
  return [
    defineRoute({
      method: 'post',
      path: '/api/projects/:id/images',
      summary:
        'Upload an image (multipart/form-data: field "file"; optional "name", "plane" for a FITS cube). ' +
        "FITS (also gzip-compressed), TIFF, PNG or JPEG; counts against the uploader's quota (owners, editors, admins)",
      tag,
      access: 'signed-in',
      params: projectIdParamsSchema,
      // The role check comes before multer, so nobody without the right streams a file to disk.
      load: [loadProject('editor'), receiveUpload(ctx.config.uploadMaxBytes)],
      responses: {
        201: { description: 'Stored', schema: imageSummarySchema },
        ...errors(403, 404, 409, 413, 422),
      },
      handler: controller.upload,
    }),
    defineRoute({
      method: 'get',
      path: '/api/projects/:id/images',
      summary: 'Images of a project, newest first (no pixels)',
      tag,
      access: 'signed-in',
      params: projectIdParamsSchema,
      load: [loadProject('viewer')],
      responses: { 200: { description: 'Images', schema: imageListSchema }, ...errors(404) },
      handler: controller.list,
    }),
    defineRoute({
      method: 'get',
      path: '/api/images/:id',
      summary: 'An image with its header cards and WCS',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImage('viewer')],
      responses: { 200: { description: 'Image', schema: imageDetailSchema }, ...errors(404) },
      handler: controller.show,
    }),
    defineRoute({
      method: 'patch',
      path: '/api/images/:id',
      summary: 'Rename an image (owners, editors, admins)',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImage('editor')],
      body: renameImageRequestSchema,
      responses: { 200: { description: 'Image', schema: imageSummarySchema }, ...errors(403, 404) },
      handler: controller.rename,
    }),
    defineRoute({
      method: 'delete',
      path: '/api/images/:id',
      summary: "Delete an image; its bytes are released from the uploader's quota (owners, editors, admins)",
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImage('editor')],
      responses: { 204: { description: 'Deleted' }, ...errors(403, 404, 409) },
      handler: controller.remove,
    }),
    defineRoute({
      method: 'get',
      path: '/api/images/:id/thumbnail',
      summary: 'Thumbnail PNG (asinh stretch, at most 256 pixels; ETag)',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImage('viewer')],
      responses: { 200: { description: 'image/png' }, 304: { description: 'Not modified' }, ...errors(404) },
      handler: controller.thumbnail,
    }),
    defineRoute({
      method: 'get',
      path: '/api/images/:id/original',
      summary: 'Download the file as uploaded',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      load: [loadImage('viewer')],
      responses: { 200: { description: 'The original file' }, ...errors(404) },
      handler: controller.original,
    }),
    defineRoute({
      method: 'get',
      path: '/api/images/:id/pixels',
      summary:
        'Block-averaged float32 view at most maxSize pixels on the longer side (binary; format in shared/images.ts; ETag)',
      tag,
      access: 'signed-in',
      params: imageIdParamsSchema,
      query: pixelViewQuerySchema,
      load: [loadImage('viewer')],
      responses: {
        200: { description: 'application/octet-stream: 32-byte header + float32 little-endian pixels' },
        304: { description: 'Not modified' },
        ...errors(404),
      },
      handler: controller.pixels,
    }),
  ];
}
