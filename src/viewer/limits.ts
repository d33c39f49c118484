/**
 * Display limits from the finite, unmasked pixels of a plane.
 * A "clip" of p % keeps the central p % of the values: the limits are the (100 − p)/2 and (100 + p)/2
 * percentiles (common practice for display, no source). Percentiles interpolate linearly between order
 * statistics at rank h = (n − 1) q (the definition numpy uses by default; Hyndman & Fan 1996, Am. Stat. 50,
 * 361, definition 7). Clip 100 % gives the minimum and maximum.
 */
import type { DisplayLimits } from './stretch';

/** Sorted copy of the finite values whose mask entry is 0 (mask optional, same length as data). */
export function sortedValidValues(data: Float32Array, mask?: Uint8Array | null): Float32Array {
  if (mask && mask.length !== data.length) {
    throw new RangeError(`The mask has ${mask.length} entries but the plane has ${data.length} pixels.`);
  }
  const values = new Float32Array(data.length);
  let n = 0;
  for (let i = 0; i < data.length; i++) {
    const v = data[i]!;
    if (Number.isFinite(v) && !(mask && mask[i])) values[n++] = v;
  }
  return values.subarray(0, n).sort();
}

/** q-quantile (0 ≤ q ≤ 1) of sorted values, linear between order statistics. */
export function quantileOfSorted(sorted: Float32Array, q: number): number {
  if (sorted.length === 0) throw new RangeError('There are no valid pixels to take limits from.');
  if (!(q >= 0 && q <= 1)) throw new RangeError(`A quantile must lie in [0, 1], got ${q}.`);
  const h = (sorted.length - 1) * q;
  const below = Math.floor(h);
  const above = Math.min(below + 1, sorted.length - 1);
  const lo = sorted[below]!;
  const hi = sorted[above]!;
  return lo + (h - below) * (hi - lo);
}

/** Limits that keep the central `clipPercent` % of the sorted values. */
export function clipLimits(sorted: Float32Array, clipPercent: number): DisplayLimits {
  if (!(clipPercent > 0 && clipPercent <= 100)) {
    throw new RangeError(`The clip must be a percentage above 0 and at most 100, got ${clipPercent}.`);
  }
  const tail = (100 - clipPercent) / 200;
  let lower = quantileOfSorted(sorted, tail);
  let upper = quantileOfSorted(sorted, 1 - tail);
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
