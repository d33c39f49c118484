import type { RelationMappings } from 'objection';

import type { Invitation as InvitationDto, InviteRole } from '../../shared/projects';
import { BaseModel, isoDate } from './base-model';

export class Invitation extends BaseModel {
  static override tableName = 'invitations';
  static override hasUpdatedAt = false;

  id!: number;
  projectId!: number;
  email!: string;
  role!: InviteRole;
  tokenHash!: string;
  invitedById!: number | null;
  expiresAt!: Date;
  acceptedAt!: Date | null;
  project?: Project;
  invitedBy?: User | null;

  static override relationMappings = (): RelationMappings => ({
    project: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: Project,
      join: { from: 'invitations.projectId', to: 'projects.id' },
    },
    invitedBy: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'invitations.invitedById', to: 'users.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['projectId', 'email', 'role', 'tokenHash'],
    properties: {
      id: { type: 'integer' },
      projectId: { type: 'integer' },
      email: { type: 'string', minLength: 3, maxLength: 254 },
      role: { enum: ['editor', 'viewer'] },
      tokenHash: { type: 'string', minLength: 64, maxLength: 64 },
      invitedById: { type: ['integer', 'null'] },
    },
  };

  toDto(): InvitationDto {
    return {
      id: this.id,
      projectId: this.projectId,
      email: this.email,
      role: this.role,
      invitedById: this.invitedById,
      createdAt: isoDate(this.createdAt),
      expiresAt: isoDate(this.expiresAt),
    };
  }
}

import { Project } from './project';
import { User } from './user';
