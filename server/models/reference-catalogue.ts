import type { Modifiers, RelationMappings } from 'objection';

import type {
  ReferenceColumnDto,
  ReferenceFormatName,
  ReferencePositions,
  RejectedRowDto,
} from '../../shared/cross-match';
import type { ColumnMapping } from '../catalogue/read-reference';
import { BaseModel } from './base-model';

/**
 * A reference catalogue uploaded into a project (migrations/202612020730-create-reference-catalogues.ts).
 * The original file and the entries read from it live in `reference_catalogue_contents` and are read only by
 * the cross-match service.
 */
export class ReferenceCatalogue extends BaseModel {
  static override tableName = 'reference_catalogues';
  static override hasUpdatedAt = false;

  id!: number;
  projectId!: number;
  uploadedById!: number | null;
  /** Whose quota `bytes` is charged to (the project's owner at upload time). */
  chargedUserId!: number | null;
  name!: string;
  originalFileName!: string;
  format!: ReferenceFormatName;
  positions!: ReferencePositions;
  mapping!: ColumnMapping;
  columns!: ReferenceColumnDto[];
  rowsRead!: number;
  rowsRejected!: number;
  rejected!: RejectedRowDto[];
  bytes!: number;

  static override jsonAttributes = ['mapping', 'columns', 'rejected'];

  static override modifiers: Modifiers = {
    /** The caller's project's catalogues, newest first. */
    ofProject(query, projectId: number) {
      query
        .where('reference_catalogues.projectId', projectId)
        .orderBy('reference_catalogues.createdAt', 'desc')
        .orderBy('reference_catalogues.id', 'desc');
    },
  };

  static override relationMappings = (): RelationMappings => ({
    project: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: Project,
      join: { from: 'reference_catalogues.projectId', to: 'projects.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['projectId', 'name', 'originalFileName', 'format', 'positions', 'rowsRead', 'rowsRejected'],
    properties: {
      id: { type: 'integer' },
      projectId: { type: 'integer' },
      uploadedById: { type: ['integer', 'null'] },
      chargedUserId: { type: ['integer', 'null'] },
      name: { type: 'string', minLength: 1, maxLength: 200 },
      originalFileName: { type: 'string', maxLength: 1000 },
      format: { enum: ['csv', 'votable'] },
      positions: { enum: ['sky', 'pixel'] },
      rowsRead: { type: 'integer', minimum: 0 },
      rowsRejected: { type: 'integer', minimum: 0 },
      bytes: { type: 'integer', minimum: 0 },
    },
  };
}

import { Project } from './project';
