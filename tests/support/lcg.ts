/** A seeded uniform generator on (0, 1) for test data (a 32-bit linear congruential generator, the constants of
 *  Numerical Recipes' quick generator, from memory). Deterministic per seed; not for anything statistical beyond filling arrays. */
export function lcg(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return (s + 0.5) / 2 ** 32;
  };
}
