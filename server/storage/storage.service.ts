/** Storage usage for administrators: the quota counter per account, and image bytes per account and project. */
import type { Knex } from 'knex';

import type { StorageUsage } from '../../shared/images';

/** Per-user and per-project usage for administrators. */
export async function storageUsage(knex: Knex): Promise<StorageUsage> {
  const users = (await knex('users as u')
    .leftJoin('images as i', 'i.uploaded_by_id', 'u.id')
    .select('u.id as user_id', 'u.email', 'u.display_name', 'u.quota_bytes', 'u.bytes_used')
    .count('i.id as image_count')
    .select(knex.raw('coalesce(sum(i.file_bytes), 0)::bigint as image_bytes'))
    .groupBy('u.id')
    .orderBy('u.bytes_used', 'desc')
    .orderBy('u.id')) as Record<string, unknown>[];
  const projects = (await knex('projects as p')
    .leftJoin('images as i', 'i.project_id', 'p.id')
    .select('p.id as project_id', 'p.name')
    .count('i.id as image_count')
    .select(knex.raw('coalesce(sum(i.file_bytes), 0)::bigint as image_bytes'))
    .groupBy('p.id')
    .orderBy('image_bytes', 'desc')
    .orderBy('p.id')) as Record<string, unknown>[];
  const n = (value: unknown) => Number(value);
  const userRows = users.map((row) => ({
    userId: n(row.userId),
    email: String(row.email),
    displayName: String(row.displayName),
    quotaBytes: n(row.quotaBytes),
    bytesUsed: n(row.bytesUsed),
    imageCount: n(row.imageCount),
    imageBytes: n(row.imageBytes),
  }));
  return {
    users: userRows,
    projects: projects.map((row) => ({
      projectId: n(row.projectId),
      name: String(row.name),
      imageCount: n(row.imageCount),
      imageBytes: n(row.imageBytes),
    })),
    totals: {
      bytesUsed: userRows.reduce((sum, row) => sum + row.bytesUsed, 0),
      quotaBytes: userRows.reduce((sum, row) => sum + row.quotaBytes, 0),
    },
  };
}
