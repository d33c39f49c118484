/** Writing and reading the security audit log. */
import type { Knex } from 'knex';

import type { AuditAction, AuditPage, AuditQuery, AuditTargetType } from '../../shared/admin';
import { AuditEvent } from '../models/audit-event';
import { isoDate } from '../models/base-model';

export interface AuditEntry {
  action: AuditAction;
  actorId?: number | null;
  targetType?: AuditTargetType | null;
  targetId?: number | null;
  details?: Record<string, unknown>;
  ip?: string | null;
}

/** Appends one event; pass the transaction of the change it records so both commit or neither. */
export async function recordAudit(entry: AuditEntry, trx?: Knex.Transaction): Promise<void> {
  await AuditEvent.query(trx).insert({
    action: entry.action,
    actorId: entry.actorId ?? null,
    targetType: entry.targetType ?? null,
    targetId: entry.targetId ?? null,
    details: entry.details ?? {},
    ip: entry.ip ?? null,
  });
}

/** Newest first, filtered and paged. */
export async function listAudit(query: AuditQuery): Promise<AuditPage> {
  const base = AuditEvent.query()
    .modify((builder) => {
      if (query.action) builder.where('action', query.action);
      if (query.actorId) builder.where('actorId', query.actorId);
      if (query.targetType) builder.where('targetType', query.targetType);
    })
    .withGraphJoined('actor(emailOnly)')
    .modifiers({ emailOnly: (builder) => builder.select('email') })
    .orderBy('audit_events.id', 'desc');
  const { results, total } = await base.page(query.page - 1, query.pageSize);
  return {
    items: results.map((event) => ({
      id: event.id,
      action: event.action,
      actorId: event.actorId,
      actorEmail: event.actor?.email ?? null,
      targetType: event.targetType,
      targetId: event.targetId,
      details: event.details ?? {},
      ip: event.ip,
      createdAt: isoDate(event.createdAt),
    })),
    total,
    page: query.page,
    pageSize: query.pageSize,
  };
}
