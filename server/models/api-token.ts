import type { RelationMappings } from 'objection';

import type { ApiToken as ApiTokenDto } from '../../shared/tokens';
import { BaseModel, isoDate, isoDateOrNull } from './base-model';

export class ApiToken extends BaseModel {
  static override tableName = 'api_tokens';
  static override hasUpdatedAt = false;

  id!: number;
  userId!: number;
  name!: string;
  prefix!: string;
  tokenHash!: string;
  lastUsedAt!: Date | null;
  user?: User;

  static override relationMappings = (): RelationMappings => ({
    user: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'api_tokens.userId', to: 'users.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['userId', 'name', 'prefix', 'tokenHash'],
    properties: {
      id: { type: 'integer' },
      userId: { type: 'integer' },
      name: { type: 'string', minLength: 1, maxLength: 100 },
      prefix: { type: 'string', minLength: 4, maxLength: 32 },
      tokenHash: { type: 'string', minLength: 64, maxLength: 64 },
    },
  };

  toDto(): ApiTokenDto {
    return {
      id: this.id,
      name: this.name,
      prefix: this.prefix,
      createdAt: isoDate(this.createdAt),
      lastUsedAt: isoDateOrNull(this.lastUsedAt),
    };
  }
}

import { User } from './user';
