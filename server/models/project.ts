import type { RelationMappings } from 'objection';

import { BaseModel } from './base-model';

export class Project extends BaseModel {
  static override tableName = 'projects';

  id!: number;
  name!: string;
  description!: string;
  ownerId!: number | null;
  memberships?: Membership[];

  static override relationMappings = (): RelationMappings => ({
    memberships: {
      relation: BaseModel.HasManyRelation,
      modelClass: Membership,
      join: { from: 'projects.id', to: 'memberships.projectId' },
    },
    owner: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'projects.ownerId', to: 'users.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['name'],
    properties: {
      id: { type: 'integer' },
      name: { type: 'string', minLength: 1, maxLength: 120 },
      description: { type: 'string', maxLength: 2000 },
      ownerId: { type: ['integer', 'null'] },
    },
  };
}

import { Membership } from './membership';
import { User } from './user';
