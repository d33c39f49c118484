/**
 * Storage usage for administrators: the quota counter per account, image bytes per account, and per project its
 * owner, images and run results.
 */
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
  // Counts and sums in subqueries, so that images and runs do not multiply each other's rows.
  const projects = (await knex('projects as p')
    .leftJoin('users as o', 'o.id', 'p.owner_id')
    .select(
      'p.id as project_id',
      'p.name',
      'p.owner_id',
      'o.email as owner_email',
      'o.display_name as owner_name',
    )
    .select(
      knex.raw('(select count(*) from images i where i.project_id = p.id) as image_count'),
      knex.raw(
        '(select coalesce(sum(i.file_bytes), 0) from images i where i.project_id = p.id)::bigint as image_bytes',
      ),
      knex.raw('(select count(*) from runs r where r.project_id = p.id) as run_count'),
      knex.raw(
        '(select coalesce(sum(r.result_bytes), 0) from runs r where r.project_id = p.id)::bigint as run_bytes',
      ),
    )
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
    projects: projects
      .map((row) => ({
        projectId: n(row.projectId),
        name: String(row.name),
        ownerId: row.ownerId === null ? null : n(row.ownerId),
        ownerEmail: row.ownerEmail === null ? null : String(row.ownerEmail),
        ownerName: row.ownerName === null ? null : String(row.ownerName),
        imageCount: n(row.imageCount),
        imageBytes: n(row.imageBytes),
        runCount: n(row.runCount),
        runBytes: n(row.runBytes),
      }))
      // Largest first (images and run results together), then by id.
      .sort((a, b) => b.imageBytes + b.runBytes - (a.imageBytes + a.runBytes) || a.projectId - b.projectId),
    totals: {
      bytesUsed: userRows.reduce((sum, row) => sum + row.bytesUsed, 0),
      quotaBytes: userRows.reduce((sum, row) => sum + row.quotaBytes, 0),
    },
  };
}
