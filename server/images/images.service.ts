/**
 * Images of a project: upload (read, analyse, charge the quota and store in one transaction), list, read,
 * rename, delete, and the stored byte strings (original, thumbnail, pixel view).
 */
import { createHash } from 'node:crypto';
import { endianness } from 'node:os';

import type { Knex } from 'knex';
import { UniqueViolationError } from 'objection';

import type { ImageDetail, ImageSummary } from '../../shared/images';
import { encodePixelView } from '../../shared/images';
import { ImageReadError } from '../engine/io/read-image';
import { AppError, conflict, notFound } from '../http/app-error';
import { isoDate } from '../models/base-model';
import { Image } from '../models/image';
import type { User } from '../models/user';
import { chargeQuota, precheckQuota } from '../storage/quota';
import { analyseUpload } from './analysis-thread';
import { downsampleMean } from './downsample';
import { imageNotFoundMessage } from './image-access';
import { ViewCache } from './view-cache';

// Float32Array bytes are written as they lie in memory; the stored plane is documented as little-endian.
if (endianness() !== 'LE')
  throw new Error('Skysieve stores float32 planes little-endian and needs a little-endian CPU.');

export const duplicateMessage = (name: string) => `This image is already in the project as «${name}».`;

export interface UploadedFile {
  /** Temporary file holding the upload. */
  path: string;
  /** Its content. */
  bytes: Uint8Array;
  originalName: string;
}

export interface UploadOptions {
  name?: string;
  plane?: number;
  maxPixels: number;
}

type ImageRow = Image & { uploaderName?: string | null };

export function toSummary(image: ImageRow): ImageSummary {
  return {
    id: image.id,
    projectId: image.projectId,
    name: image.name,
    originalFileName: image.originalFileName,
    format: image.format,
    gzipped: image.gzipped,
    width: image.width,
    height: image.height,
    plane: image.plane,
    unit: image.unit,
    fileBytes: image.fileBytes,
    contentSha256: image.contentSha256,
    statistics: image.statistics,
    noise: image.noise,
    wcs: image.wcs,
    beam: image.beam,
    warnings: image.warnings,
    uploadedBy:
      image.uploadedById === null ? null : { id: image.uploadedById, displayName: image.uploaderName ?? '' },
    createdAt: isoDate(image.createdAt),
    updatedAt: isoDate(image.updatedAt),
  };
}

function withUploader<Q extends ReturnType<typeof Image.query>>(query: Q): Q {
  return query
    .leftJoin('users', 'users.id', 'images.uploadedById')
    .select('users.displayName as uploaderName') as Q;
}

async function summaryById(id: number, trx?: Knex.Transaction): Promise<ImageSummary> {
  const row = (await withUploader(
    Image.query(trx).modify('summaryColumns').where('images.id', id),
  ).first()) as ImageRow | undefined;
  if (!row) throw notFound(imageNotFoundMessage);
  return toSummary(row);
}

async function refuseDuplicate(projectId: number, sha256: string, trx?: Knex.Transaction): Promise<void> {
  const existing = await Image.query(trx).select('name').where({ projectId, contentSha256: sha256 }).first();
  if (existing) throw conflict(duplicateMessage(existing.name), { imageId: existing.id });
}

/** The bytes of a typed array as a Buffer, without copying. */
const bufferOf = (array: Float32Array | Uint8Array): Buffer =>
  Buffer.from(array.buffer, array.byteOffset, array.byteLength);

function readError(error: unknown): never {
  if (error instanceof ImageReadError)
    throw new AppError('unprocessable', error.message, { reason: error.code });
  throw error;
}

/**
 * Reads and stores an upload into the project for `user`. Order: duplicate check (409), quota pre-check without
 * a lock (413 before the expensive read), read (422), then ONE transaction: lock the user row, check and charge
 * the quota (413), insert the image and its blobs. A failure anywhere leaves no row and no charge.
 */
export async function uploadImage(
  user: User,
  projectId: number,
  file: UploadedFile,
  options: UploadOptions,
): Promise<ImageSummary> {
  const bytes = file.bytes;
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  await refuseDuplicate(projectId, sha256);
  await precheckQuota(Image.knex(), user.id, bytes.length);

  const image = await analyseUpload(file.path, bytes, {
    fileName: file.originalName,
    plane: options.plane,
    maxPixels: options.maxPixels,
  }).catch(readError);
  const name = (options.name ?? file.originalName).trim().slice(0, 200) || 'image';
  const { pixels, mask, thumbnail, ...metadata } = image;

  try {
    const id = await Image.transaction(async (trx) => {
      await chargeQuota(trx, user.id, bytes.length);
      const row = await Image.query(trx).insert({
        projectId,
        uploadedById: user.id,
        name,
        originalFileName: file.originalName.slice(0, 1000),
        gzipped: bytes[0] === 0x1f && bytes[1] === 0x8b,
        contentSha256: sha256,
        fileBytes: bytes.length,
        ...metadata,
      });
      await trx('image_blobs').insert({
        imageId: row.id,
        original: bufferOf(bytes),
        pixels: bufferOf(pixels),
        mask: bufferOf(mask),
        thumbnail: bufferOf(thumbnail),
      });
      return row.id;
    });
    return await summaryById(id);
  } catch (error) {
    // Two uploads of the same file at once: the unique index decides; the loser's transaction rolled back.
    if (error instanceof UniqueViolationError) await refuseDuplicate(projectId, sha256);
    throw error;
  }
}

export async function listImages(projectId: number): Promise<ImageSummary[]> {
  const rows = (await withUploader(
    Image.query().modify('summaryColumns').where('images.projectId', projectId),
  ).orderBy([
    { column: 'images.createdAt', order: 'desc' },
    { column: 'images.id', order: 'desc' },
  ])) as ImageRow[];
  return rows.map(toSummary);
}

export async function imageDetail(id: number): Promise<ImageDetail> {
  const row = (await withUploader(Image.query().select('images.*').where('images.id', id)).first()) as
    ImageRow | undefined;
  if (!row) throw notFound(imageNotFoundMessage);
  return { ...toSummary(row), header: row.header, originalAxes: row.originalAxes };
}

export async function renameImage(id: number, name: string): Promise<ImageSummary> {
  await Image.query().patch({ name }).where('id', id);
  return summaryById(id);
}

/** Deletes the image and its blobs; the delete trigger releases its bytes from the uploader's quota (same transaction). */
export async function deleteImage(id: number): Promise<void> {
  await Image.transaction(async (trx) => {
    const deleted = await Image.query(trx).deleteById(id);
    if (deleted === 0) throw notFound(imageNotFoundMessage);
  });
}

type BlobColumn = 'original' | 'thumbnail' | 'pixels' | 'mask';

async function blob(id: number, column: BlobColumn): Promise<Buffer> {
  const row = (await Image.knex()('image_blobs').select(column).where('image_id', id).first()) as
    Record<BlobColumn, Buffer> | undefined;
  if (!row) throw notFound(imageNotFoundMessage);
  return row[column];
}

export const originalBytes = (id: number) => blob(id, 'original');
export const thumbnailBytes = (id: number) => blob(id, 'thumbnail');

/** The stored float32 plane and mask of an image. */
export async function pixelPlane(image: Image): Promise<{ data: Float32Array; mask: Uint8Array }> {
  const row = (await Image.knex()('image_blobs')
    .select('pixels', 'mask')
    .where('image_id', image.id)
    .first()) as { pixels: Buffer; mask: Buffer } | undefined;
  if (!row) throw notFound(imageNotFoundMessage);
  // Copy into an aligned buffer: a Buffer's byteOffset need not be a multiple of 4.
  const data = new Float32Array(image.width * image.height);
  new Uint8Array(data.buffer).set(row.pixels.subarray(0, data.byteLength));
  return { data, mask: new Uint8Array(row.mask) };
}

/** Encoded views kept in memory (64 MiB): the first view of a large image reads its whole plane. */
const viewCache = new ViewCache(64 * 1024 ** 2);

/** The binary pixel view (shared/images.ts format) at most maxSize on the longer side. */
export async function pixelView(image: Image, maxSize: number): Promise<Uint8Array> {
  const key = `${image.id}:${image.contentSha256}:${maxSize}`;
  const cached = viewCache.get(key);
  if (cached) return cached;
  const { data, mask } = await pixelPlane(image);
  const view = encodePixelView(downsampleMean(data, mask, image.width, image.height, maxSize));
  viewCache.set(key, view);
  return view;
}
