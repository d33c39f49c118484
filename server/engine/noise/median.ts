/**
 * Median of the first `count` values of a scratch array, by Hoare's quickselect (C. A. R. Hoare, Algorithm 65
 * "Find", CACM 4, 1961) with a median-of-three pivot. Reorders the scratch array; O(n) on average.
 * For an even count the mean of the two middle values.
 */
function select(a: Float64Array, count: number, k: number): number {
  let lo = 0;
  let hi = count - 1;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    // median of three as pivot
    const x = a[lo]!;
    const y = a[mid]!;
    const z = a[hi]!;
    const pivot = x < y ? (y < z ? y : x < z ? z : x) : x < z ? x : y < z ? z : y;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i]! < pivot) i++;
      while (a[j]! > pivot) j--;
      if (i <= j) {
        const t = a[i]!;
        a[i] = a[j]!;
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k]!;
  }
  return a[k]!;
}

export function medianInPlace(scratch: Float64Array, count = scratch.length): number {
  if (count <= 0) throw new Error('median of an empty set');
  const half = count >>> 1;
  const upper = select(scratch, count, half);
  if (count % 2 === 1) return upper;
  // the largest value below index `half` is the maximum of the left part after selection
  let lower = -Infinity;
  for (let i = 0; i < half; i++) if (scratch[i]! > lower) lower = scratch[i]!;
  return (lower + upper) / 2;
}
