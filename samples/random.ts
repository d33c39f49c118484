/**
 * A small seeded random-number generator for the synthetic skies, so every sample and test is reproducible.
 *
 * - Uniforms: xoshiro128** (D. Blackman & S. Vigna, "Scrambled linear pseudorandom number generators",
 *   ACM TOMS 47, 2021), state seeded by splitmix32 (a 32-bit variant of Steele, Lea & Flood's SplitMix,
 *   OOPSLA 2014) so that nearby seeds give unrelated streams. Doubles in [0, 1) take 53 bits from two outputs.
 * - Normals: Box–Muller (G. E. P. Box & M. E. Muller, Ann. Math. Stat. 29, 610, 1958), both values used.
 * - Poisson: for λ < 10 Knuth's multiplication method (TAOCP vol. 2, §3.4.1); for λ ≥ 10 the transformed
 *   rejection method with squeeze "PTRS" (W. Hörmann, Insurance: Math. Econ. 12, 39, 1993), exact for all λ ≥ 10.
 * Checked in tests/engine/samples against @stdlib's normal and Poisson distributions.
 */

export class SeededRandom {
  private s0: number;
  private s1: number;
  private s2: number;
  private s3: number;
  private spareNormal: number | null = null;

  constructor(seed: number) {
    if (!Number.isInteger(seed)) throw new Error(`Random seed must be a whole number (got ${seed})`);
    let x = seed >>> 0;
    const next = (): number => {
      // splitmix32
      x = (x + 0x9e3779b9) >>> 0;
      let z = x;
      z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
      z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
      return (z ^ (z >>> 16)) >>> 0;
    };
    this.s0 = next();
    this.s1 = next();
    this.s2 = next();
    this.s3 = next();
    if ((this.s0 | this.s1 | this.s2 | this.s3) === 0) this.s0 = 1;
  }

  /** Next 32-bit unsigned integer (xoshiro128**). */
  nextUint32(): number {
    const rotl = (v: number, k: number): number => ((v << k) | (v >>> (32 - k))) >>> 0;
    const result = Math.imul(rotl(Math.imul(this.s1, 5) >>> 0, 7), 9) >>> 0;
    const t = (this.s1 << 9) >>> 0;
    this.s2 = (this.s2 ^ this.s0) >>> 0;
    this.s3 = (this.s3 ^ this.s1) >>> 0;
    this.s1 = (this.s1 ^ this.s2) >>> 0;
    this.s0 = (this.s0 ^ this.s3) >>> 0;
    this.s2 = (this.s2 ^ t) >>> 0;
    this.s3 = rotl(this.s3, 11);
    return result;
  }

  /** Uniform double in [0, 1) with 53 random bits. */
  uniform(): number {
    const hi = this.nextUint32() >>> 5; // 27 bits
    const lo = this.nextUint32() >>> 6; // 26 bits
    return (hi * 67108864 + lo) / 9007199254740992;
  }

  /** Standard normal deviate (Box–Muller). */
  normal(): number {
    if (this.spareNormal !== null) {
      const v = this.spareNormal;
      this.spareNormal = null;
      return v;
    }
    let u = 0;
    while (u === 0) u = this.uniform();
    const v = this.uniform();
    const r = Math.sqrt(-2 * Math.log(u));
    this.spareNormal = r * Math.sin(2 * Math.PI * v);
    return r * Math.cos(2 * Math.PI * v);
  }

  /** Poisson deviate with mean λ ≥ 0. */
  poisson(lambda: number): number {
    if (!(lambda >= 0) || !Number.isFinite(lambda))
      throw new Error(`Poisson mean must be finite and ≥ 0 (got ${lambda})`);
    if (lambda === 0) return 0;
    if (lambda < 10) {
      const limit = Math.exp(-lambda);
      let k = 0;
      let p = this.uniform();
      while (p > limit) {
        k++;
        p *= this.uniform();
      }
      return k;
    }
    const slam = Math.sqrt(lambda);
    const logLam = Math.log(lambda);
    const b = 0.931 + 2.53 * slam;
    const a = -0.059 + 0.02483 * b;
    const invAlpha = 1.1239 + 1.1328 / (b - 3.4);
    const vr = 0.9277 - 3.6224 / (b - 2);
    for (;;) {
      const u = this.uniform() - 0.5;
      const v = this.uniform();
      const us = 0.5 - Math.abs(u);
      const k = Math.floor(((2 * a) / us + b) * u + lambda + 0.43);
      if (us >= 0.07 && v <= vr) return k;
      if (k < 0 || (us < 0.013 && v > us)) continue;
      if (
        Math.log(v) + Math.log(invAlpha) - Math.log(a / (us * us) + b) <=
        -lambda + k * logLam - logFactorial(k)
      ) {
        return k;
      }
    }
  }
}

const LOG_FACTORIAL_TABLE: number[] = [0];
for (let k = 1; k < 256; k++) LOG_FACTORIAL_TABLE.push((LOG_FACTORIAL_TABLE[k - 1] as number) + Math.log(k));

/** ln k! : a table below 256, Stirling's series beyond (error < 1e-14 there; A&S 6.1.41). */
export function logFactorial(k: number): number {
  if (k < 256) return LOG_FACTORIAL_TABLE[k] as number;
  const n = k + 1;
  const inv = 1 / n;
  const inv2 = inv * inv;
  return (
    (n - 0.5) * Math.log(n) -
    n +
    0.5 * Math.log(2 * Math.PI) +
    inv * (1 / 12 - inv2 * (1 / 360 - inv2 / 1260))
  );
}
