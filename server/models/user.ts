import type { RelationMappings, Modifiers } from 'objection';

import type { User as UserDto } from '../../shared/auth';
import { BaseModel, isoDate } from './base-model';

export class User extends BaseModel {
  static override tableName = 'users';

  id!: number;
  email!: string;
  displayName!: string;
  passwordHash!: string;
  role!: 'admin' | 'member';
  quotaBytes!: number;
  bytesUsed!: number;
  disabled!: boolean;
  emailOnRunFinish!: boolean;
  lastSignInAt!: Date | null;

  static override relationMappings = (): RelationMappings => ({
    memberships: {
      relation: BaseModel.HasManyRelation,
      modelClass: Membership,
      join: { from: 'users.id', to: 'memberships.userId' },
    },
  });

  static override modifiers: Modifiers = {
    /** Case-insensitive e-mail match (the unique index is on lower(email)). */
    byEmail(query, email: string) {
      query.whereRaw('lower(email) = lower(?)', [email]);
    },
    active(query) {
      query.where('disabled', false);
    },
  };

  static override jsonSchema = {
    type: 'object',
    required: ['email', 'displayName', 'passwordHash', 'role', 'quotaBytes'],
    properties: {
      id: { type: 'integer' },
      email: { type: 'string', minLength: 3, maxLength: 254 },
      displayName: { type: 'string', minLength: 1, maxLength: 100 },
      passwordHash: { type: 'string', minLength: 20 },
      role: { enum: ['admin', 'member'] },
      quotaBytes: { type: 'integer', minimum: 0 },
      bytesUsed: { type: 'integer', minimum: 0 },
      disabled: { type: 'boolean' },
      emailOnRunFinish: { type: 'boolean' },
    },
  };

  /** The public shape of an account (never the password hash). */
  toDto(): UserDto {
    return {
      id: this.id,
      email: this.email,
      displayName: this.displayName,
      role: this.role,
      quotaBytes: this.quotaBytes,
      bytesUsed: this.bytesUsed,
      disabled: this.disabled,
      emailOnRunFinish: this.emailOnRunFinish,
      createdAt: isoDate(this.createdAt),
    };
  }
}

import { Membership } from './membership';
