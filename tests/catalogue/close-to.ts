import { expect } from 'vitest';

/** Asserts |actual − expected| ≤ tolerance; the failure message prints expected, actual, difference and tolerance. */
export function expectClose(
  actual: number | null | undefined,
  expected: number,
  tolerance: number,
  what: string,
): void {
  const difference = Math.abs((actual ?? NaN) - expected);
  const message = `${what}: expected ${expected}, actual ${actual}, difference ${difference}, tolerance ${tolerance}`;
  expect(actual !== null && actual !== undefined && difference <= tolerance, message).toBe(true);
}
