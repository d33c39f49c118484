/**
 * Display limits from the finite, unmasked pixels of a plane.
 * A "clip" of p % keeps the central p % of the values: the limits are the (100 − p)/2 and (100 + p)/2
 * percentiles (common practice for display, no source). Percentiles interpolate linearly between order
 * statistics at rank h = (n − 1) q (the definition numpy uses by default; Hyndman & Fan 1996, Am. Stat. 50,
 * 361, definition 7). Clip 100 % gives the minimum and maximum.
 *
 * Order statistics without sorting the whole plane (sorting 2048² float32 values took ~1.5 s in Chromium):
 * one pass builds a histogram of 65 536 equal bins between the minimum and the maximum; the k-th value is found
 * by walking the cumulative counts to its bin, then sorting only the values of that bin (collected in one more
 * pass, cached per bin). The result is exact: the same value a full sort would give.
 */
import type { DisplayLimits } from './stretch';

const BINS = 65536;

export interface OrderStatistics {
  /** Number of valid values. */
  readonly count: number;
  /** The k-th smallest valid value (0-based). */
  at(k: number): number;
}

/** Order statistics of a sorted array (for small inputs and tests). */
export function sortedOrderStatistics(sorted: ArrayLike<number>): OrderStatistics {
  return { count: sorted.length, at: (k) => sorted[k]! };
}

/** Order statistics of the finite values whose mask entry is 0 (mask optional, same length as data). */
export function orderStatistics(data: Float32Array, mask?: Uint8Array | null): OrderStatistics {
  if (mask && mask.length !== data.length) {
    throw new RangeError(`The mask has ${mask.length} entries but the plane has ${data.length} pixels.`);
  }
  const valid = (i: number) => Number.isFinite(data[i]!) && !(mask && mask[i]);
  let min = Infinity;
  let max = -Infinity;
  let count = 0;
  for (let i = 0; i < data.length; i++) {
    if (!valid(i)) continue;
    const v = data[i]!;
    if (v < min) min = v;
    if (v > max) max = v;
    count++;
  }
  const scale = max > min ? BINS / (max - min) : 0;
  const binOf = (v: number) => Math.min(BINS - 1, Math.floor((v - min) * scale));
  const cumulative = new Float64Array(BINS + 1); // cumulative[b] = number of values in bins < b
  if (count > 0) {
    for (let i = 0; i < data.length; i++) if (valid(i)) cumulative[binOf(data[i]!) + 1]! += 1;
    for (let b = 1; b <= BINS; b++) cumulative[b]! += cumulative[b - 1]!;
  }
  const binValues = new Map<number, Float32Array>();
  return {
    count,
    at(k) {
      if (!(k >= 0 && k < count) || !Number.isInteger(k)) {
        throw new RangeError(`Rank ${k} is outside 0 … ${count - 1}.`);
      }
      // First bin b with cumulative[b + 1] > k.
      let lo = 0;
      let hi = BINS - 1;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (cumulative[mid + 1]! > k) hi = mid;
        else lo = mid + 1;
      }
      let values = binValues.get(lo);
      if (!values) {
        values = new Float32Array(cumulative[lo + 1]! - cumulative[lo]!);
        let n = 0;
        for (let i = 0; i < data.length; i++) if (valid(i) && binOf(data[i]!) === lo) values[n++] = data[i]!;
        values.sort();
        binValues.set(lo, values);
      }
      return values[k - cumulative[lo]!]!;
    },
  };
}

/** q-quantile (0 ≤ q ≤ 1), linear between order statistics. */
export function quantile(values: OrderStatistics, q: number): number {
  if (values.count === 0) throw new RangeError('There are no valid pixels to take limits from.');
  if (!(q >= 0 && q <= 1)) throw new RangeError(`A quantile must lie in [0, 1], got ${q}.`);
  const h = (values.count - 1) * q;
  const below = Math.floor(h);
  const lo = values.at(below);
  if (h === below) return lo;
  const hi = values.at(Math.min(below + 1, values.count - 1));
  return lo + (h - below) * (hi - lo);
}

/** Limits that keep the central `clipPercent` % of the values. */
export function clipLimits(values: OrderStatistics, clipPercent: number): DisplayLimits {
  if (!(clipPercent > 0 && clipPercent <= 100)) {
    throw new RangeError(`The clip must be a percentage above 0 and at most 100, got ${clipPercent}.`);
  }
  const tail = (100 - clipPercent) / 200;
  let lower = quantile(values, tail);
  let upper = quantile(values, 1 - tail);
  if (!(upper > lower)) {
    // A flat plane: widen symmetrically so that a stretch can still be built.
    const pad = Math.abs(lower) > 0 ? Math.abs(lower) * 1e-6 : 1;
    lower -= pad;
    upper += pad;
  }
  return { lower, upper };
}

/** Typed-in limits → DisplayLimits, or a message a person understands. */
export function parseTypedLimits(lowerText: string, upperText: string): DisplayLimits | { error: string } {
  const lower = Number(lowerText.trim());
  const upper = Number(upperText.trim());
  if (lowerText.trim() === '' || !Number.isFinite(lower))
    return { error: 'Enter a number for the lower limit.' };
  if (upperText.trim() === '' || !Number.isFinite(upper))
    return { error: 'Enter a number for the upper limit.' };
  if (!(upper > lower)) return { error: 'The upper limit must be above the lower limit.' };
  return { lower, upper };
}
