import type { RelationMappings } from 'objection';

import type { AuditAction, AuditTargetType } from '../../shared/admin';
import { BaseModel } from './base-model';

export class AuditEvent extends BaseModel {
  static override tableName = 'audit_events';
  static override hasUpdatedAt = false;

  id!: number;
  action!: AuditAction;
  actorId!: number | null;
  targetType!: AuditTargetType | null;
  targetId!: number | null;
  details!: Record<string, unknown>;
  ip!: string | null;
  actor?: User | null;

  static override relationMappings = (): RelationMappings => ({
    actor: {
      relation: BaseModel.BelongsToOneRelation,
      modelClass: User,
      join: { from: 'audit_events.actorId', to: 'users.id' },
    },
  });

  static override jsonSchema = {
    type: 'object',
    required: ['action'],
    properties: {
      id: { type: 'integer' },
      action: { type: 'string', minLength: 1 },
      actorId: { type: ['integer', 'null'] },
      targetType: { type: ['string', 'null'] },
      targetId: { type: ['integer', 'null'] },
      details: { type: 'object' },
      ip: { type: ['string', 'null'] },
    },
  };
}

import { User } from './user';
