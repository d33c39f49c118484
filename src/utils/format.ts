/** Display helpers shared by the pages. */

const byteUnits = ['B', 'KiB', 'MiB', 'GiB', 'TiB'] as const;

/** Bytes in binary units (1 KiB = 1024 B), three significant digits: 1536 → "1.50 KiB". */
export function formatBytes(bytes: number): string {
  if (!Number.isFinite(bytes) || bytes < 0) return '—';
  let value = bytes;
  let unit = 0;
  while (value >= 1024 && unit < byteUnits.length - 1) {
    value /= 1024;
    unit += 1;
  }
  const text = unit === 0 ? String(value) : value.toPrecision(3);
  return `${text} ${byteUnits[unit]}`;
}

/** Share of the quota in use, 0…1 (a zero quota with usage counts as full). */
export function usageFraction(bytesUsed: number, quotaBytes: number): number {
  if (quotaBytes <= 0) return bytesUsed > 0 ? 1 : 0;
  return Math.min(1, bytesUsed / quotaBytes);
}

const dateTime = new Intl.DateTimeFormat(undefined, { dateStyle: 'medium', timeStyle: 'short' });
const dateOnly = new Intl.DateTimeFormat(undefined, { dateStyle: 'medium' });

export function formatDateTime(iso: string | null | undefined): string {
  if (!iso) return '—';
  const date = new Date(iso);
  return Number.isNaN(date.getTime()) ? iso : dateTime.format(date);
}

export function formatDate(iso: string | null | undefined): string {
  if (!iso) return '—';
  const date = new Date(iso);
  return Number.isNaN(date.getTime()) ? iso : dateOnly.format(date);
}

export const projectRoleLabels = {
  owner: 'Owner',
  editor: 'Editor',
  viewer: 'Viewer',
} as const;

export const projectRoleHelp = {
  owner: 'manages members, renames and deletes the project',
  editor: 'adds images and runs separations',
  viewer: 'reads results and exports catalogues',
} as const;
