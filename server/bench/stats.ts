/** Small helpers for the bench: medians and wall-clock timing. */
export function median(values: readonly number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const mid = Math.floor(sorted.length / 2);
  if (sorted.length === 0) return Number.NaN;
  return sorted.length % 2 === 1 ? sorted[mid]! : 0.5 * (sorted[mid - 1]! + sorted[mid]!);
}

export function nowMs(): number {
  return Number(process.hrtime.bigint()) / 1e6;
}

export function formatMs(ms: number): string {
  if (!Number.isFinite(ms)) return '–';
  return ms >= 100 ? ms.toFixed(0) : ms >= 10 ? ms.toFixed(1) : ms.toFixed(2);
}
