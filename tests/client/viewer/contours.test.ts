import { describe, expect, it } from 'vitest';

import { evenLevels, marchingSquares, type Segment } from '@/viewer/contours';

function key(s: Segment): string {
  const a = `${s.x1.toFixed(6)},${s.y1.toFixed(6)}`;
  const b = `${s.x2.toFixed(6)},${s.y2.toFixed(6)}`;
  return [a, b].sort().join(' – ');
}

describe('marching squares', () => {
  it('a single high pixel in a 3×3 grid is enclosed by a diamond through the edge midpoints', () => {
    // Centre pixel (FITS 2, 2) = 1, others 0; level 0.5 crosses each edge next to the centre half-way.
    const data = new Float32Array([0, 0, 0, 0, 1, 0, 0, 0, 0]);
    const segments = marchingSquares(data, 3, 3, 0.5);
    expect(segments.length).toBe(4);
    expect(new Set(segments.map(key))).toEqual(
      new Set(
        [
          { x1: 1.5, y1: 2, x2: 2, y2: 1.5 },
          { x1: 2, y1: 1.5, x2: 2.5, y2: 2 },
          { x1: 2.5, y1: 2, x2: 2, y2: 2.5 },
          { x1: 2, y1: 2.5, x2: 1.5, y2: 2 },
        ].map(key),
      ),
    );
  });
  it('interpolates the crossing linearly along an edge', () => {
    // 2×2 ramp in x: 0 | 4 on both rows; level 1 crosses at x = 1 + 1/4.
    const segments = marchingSquares(new Float32Array([0, 4, 0, 4]), 2, 2, 1);
    expect(segments).toEqual([{ x1: 1.25, y1: 1, x2: 1.25, y2: 2 }]);
  });
  it('resolves saddles by the cell mean and skips blank cells', () => {
    // a (bottom left) = c (top right) = 1, b = d = 0: mean 0.5. Level 0.4 → centre high → the high corners join,
    // so the lines cut off the low corners b = (2, 1) and d = (1, 2).
    const saddle = new Float32Array([1, 0, 0, 1]);
    const high = marchingSquares(saddle, 2, 2, 0.4).map(key).sort();
    expect(high).toEqual(
      [
        { x1: 1.6, y1: 1, x2: 2, y2: 1.4 },
        { x1: 1, y1: 1.6, x2: 1.4, y2: 2 },
      ]
        .map(key)
        .sort(),
    );
    // Level 0.6 → centre low → the lines cut off the high corners a and c.
    const low = marchingSquares(saddle, 2, 2, 0.6).map(key).sort();
    expect(low).toEqual(
      [
        { x1: 1, y1: 1.4, x2: 1.4, y2: 1 },
        { x1: 2, y1: 1.6, x2: 1.6, y2: 2 },
      ]
        .map(key)
        .sort(),
    );
    expect(marchingSquares(new Float32Array([0, 1, NaN, 1]), 2, 2, 0.5)).toEqual([]);
  });
  it('evenly spaced levels exclude the ends', () => {
    expect(evenLevels(0, 6, 5)).toEqual([1, 2, 3, 4, 5]);
  });
});
