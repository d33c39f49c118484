/**
 * goodFftSize(n): the smallest m ≥ n that every backend of this layer transforms fast.
 *
 * m has no prime factor other than 2, 3 and 5; from 32 up it is also a multiple of 32, which the float32 SIMD
 * backend (PFFFT: real lengths 2^a·3^b·5^c with a ≥ 5, complex lengths with a ≥ 4) needs for rows and columns.
 * Such sizes are dense enough (…, 1024, 1152, 1280, 1440, 1536, …): from 512 up the next one is at most 12.5 %
 * larger. Below 32 any 2,3,5-smooth size is returned (the float64 backend handles those).
 */
export function goodFftSize(n: number): number {
  if (!Number.isFinite(n) || n < 1) throw new RangeError(`FFT size must be at least 1, got ${String(n)}`);
  for (let m = Math.ceil(n); ; m++) {
    if (m >= 32 && m % 32 !== 0) continue;
    if (isSmooth235(m)) return m;
  }
}

/** True when m has no prime factor above 5. */
export function isSmooth235(m: number): boolean {
  let rest = m;
  for (const p of [2, 3, 5]) while (rest % p === 0) rest /= p;
  return rest === 1;
}
