import type { RelationMappings } from 'objection';

import { BaseModel } from './base-model';

export class PasswordReset extends BaseModel {
  static override tableName = 'password_resets';
  static override hasUpdatedAt = false;

  id!: number;
  userId!: number;
  tokenHash!: string;
  expiresAt!: Date;
  usedAt!: Date | null;
  requestedIp!: string | null;

  static override relationMappings = (): RelationMappings => ({
    user: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'password_resets.userId', to: 'users.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['userId', 'tokenHash'],
    properties: {
      id: { type: 'integer' },
      userId: { type: 'integer' },
      tokenHash: { type: 'string', minLength: 64, maxLength: 64 },
      requestedIp: { type: ['string', 'null'] },
    },
  };
}

import { User } from './user';
