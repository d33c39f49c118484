import type { RelationMappings } from 'objection';

import type { ProjectRole } from '../../shared/projects';
import { BaseModel } from './base-model';

export class Membership extends BaseModel {
  static override tableName = 'memberships';

  id!: number;
  projectId!: number;
  userId!: number;
  role!: ProjectRole;
  user?: User;

  static override relationMappings = (): RelationMappings => ({
    user: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'memberships.userId', to: 'users.id' },
    },
    project: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: Project,
      join: { from: 'memberships.projectId', to: 'projects.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['projectId', 'userId', 'role'],
    properties: {
      id: { type: 'integer' },
      projectId: { type: 'integer' },
      userId: { type: 'integer' },
      role: { enum: ['owner', 'editor', 'viewer'] },
    },
  };
}

import { Project } from './project';
import { User } from './user';
