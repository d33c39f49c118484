/**
 * mulberry32, a small public-domain 32-bit seeded generator (Tommy Ettinger, 2017): one add, two multiplies and
 * a few shifts per draw, fully determined by its seed. Good enough for scattering test positions, synthetic
 * benchmark inputs and injection sites; not for cryptography. The demo skies use the longer-period xoshiro128**
 * in samples/random.ts instead.
 */

/** The raw generator: each call returns the next unsigned 32-bit integer. */
export function mulberry32(seed: number): () => number {
  let state = seed >>> 0;
  return () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return (t ^ (t >>> 14)) >>> 0;
  };
}

/** Uniform numbers in [0, 1) from mulberry32 (the 32-bit output divided by 2³²). */
export function seededRandom(seed: number): () => number {
  const next = mulberry32(seed);
  return () => next() / 4294967296;
}
