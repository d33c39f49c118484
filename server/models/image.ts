import type { Modifiers, RelationMappings } from 'objection';

import type {
  BeamSummary,
  HeaderCardDto,
  ImageFormatName,
  NoiseEstimate,
  PixelStatistics,
  WcsSummary,
} from '../../shared/images';
import { BaseModel } from './base-model';

/**
 * An uploaded image: its metadata row. The byte strings (original, float32 plane, mask, thumbnail) live in
 * `image_blobs` and are read by the image service only where a route needs them.
 */
export class Image extends BaseModel {
  static override tableName = 'images';

  id!: number;
  projectId!: number;
  uploadedById!: number | null;
  name!: string;
  originalFileName!: string;
  format!: ImageFormatName;
  gzipped!: boolean;
  contentSha256!: string;
  /** Size of the original file: what the uploader's quota is charged. */
  fileBytes!: number;
  width!: number;
  height!: number;
  plane!: number | null;
  originalAxes!: number[];
  unit!: string | null;
  header!: HeaderCardDto[];
  wcs!: WcsSummary | null;
  beam!: BeamSummary | null;
  statistics!: PixelStatistics;
  noise!: NoiseEstimate | null;
  warnings!: string[];
  uploadedBy?: User | null;
  project?: Project;

  static override jsonAttributes = [
    'originalAxes',
    'header',
    'wcs',
    'beam',
    'statistics',
    'noise',
    'warnings',
  ];

  static override relationMappings = (): RelationMappings => ({
    project: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: Project,
      join: { from: 'images.projectId', to: 'projects.id' },
    },
    uploadedBy: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'images.uploadedById', to: 'users.id' },
    },
  });

  static override modifiers: Modifiers = {
    /** Every column but the header cards (large for some files), for lists. */
    summaryColumns(query) {
      query.select(
        ...[
          'id',
          'projectId',
          'uploadedById',
          'name',
          'originalFileName',
          'format',
          'gzipped',
          'contentSha256',
          'fileBytes',
          'width',
          'height',
          'plane',
          'unit',
          'wcs',
          'beam',
          'statistics',
          'noise',
          'warnings',
          'createdAt',
          'updatedAt',
        ].map((column) => `images.${column}`),
      );
    },
  };

  static override jsonSchema = {
    type: 'object',
    required: [
      'projectId',
      'name',
      'originalFileName',
      'format',
      'contentSha256',
      'fileBytes',
      'width',
      'height',
    ],
    properties: {
      id: { type: 'integer' },
      projectId: { type: 'integer' },
      uploadedById: { type: ['integer', 'null'] },
      name: { type: 'string', minLength: 1, maxLength: 200 },
      originalFileName: { type: 'string', maxLength: 1000 },
      format: { enum: ['fits', 'tiff', 'png', 'jpeg'] },
      gzipped: { type: 'boolean' },
      contentSha256: { type: 'string', pattern: '^[0-9a-f]{64}$' },
      fileBytes: { type: 'integer', minimum: 0 },
      width: { type: 'integer', minimum: 1 },
      height: { type: 'integer', minimum: 1 },
      plane: { type: ['integer', 'null'] },
      unit: { type: ['string', 'null'] },
    },
  };
}

import { Project } from './project';
import { User } from './user';
