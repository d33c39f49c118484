/**
 * Contour lines of a plane by marching squares (Lorensen & Cline 1987, "Marching cubes", SIGGRAPH 21(4), 163,
 * reduced to two dimensions): each cell of four neighbouring pixel centres is classified by which corners lie at
 * or above the level (16 cases); the contour crosses each edge whose ends differ, at the linearly interpolated
 * point. The two saddle cases (opposite corners above) are resolved by the mean of the four corners: above the
 * level joins the high corners. Cells with a non-finite corner are skipped, so blank areas draw no lines.
 * Output segments are in FITS pixel coordinates of the plane (pixel (i, j) 0-based at (i + 1, j + 1)), with
 * the plane's row 0 at the bottom.
 */

export interface Segment {
  x1: number;
  y1: number;
  x2: number;
  y2: number;
}

export function marchingSquares(data: Float32Array, width: number, height: number, level: number): Segment[] {
  if (data.length !== width * height) {
    throw new RangeError(`The plane has ${data.length} values, expected ${width}×${height}.`);
  }
  if (!Number.isFinite(level)) throw new RangeError(`A contour level must be a finite number, got ${level}.`);
  const segments: Segment[] = [];
  for (let j = 0; j + 1 < height; j++) {
    for (let i = 0; i + 1 < width; i++) {
      // Corners: a = (i, j), b = (i+1, j), c = (i+1, j+1), d = (i, j+1); counter-clockwise from bottom left.
      const a = data[j * width + i]!;
      const b = data[j * width + i + 1]!;
      const c = data[(j + 1) * width + i + 1]!;
      const d = data[(j + 1) * width + i]!;
      if (!Number.isFinite(a) || !Number.isFinite(b) || !Number.isFinite(c) || !Number.isFinite(d)) continue;
      const index = (a >= level ? 1 : 0) | (b >= level ? 2 : 0) | (c >= level ? 4 : 0) | (d >= level ? 8 : 0);
      if (index === 0 || index === 15) continue;
      const x = i + 1;
      const y = j + 1;
      const t = (p: number, q: number) => (level - p) / (q - p);
      // Crossing points on the four edges.
      const bottom = () => ({ x: x + t(a, b), y });
      const right = () => ({ x: x + 1, y: y + t(b, c) });
      const top = () => ({ x: x + t(d, c), y: y + 1 });
      const left = () => ({ x, y: y + t(a, d) });
      const add = (p: { x: number; y: number }, q: { x: number; y: number }) =>
        segments.push({ x1: p.x, y1: p.y, x2: q.x, y2: q.y });
      switch (index) {
        case 1:
        case 14:
          add(left(), bottom());
          break;
        case 2:
        case 13:
          add(bottom(), right());
          break;
        case 3:
        case 12:
          add(left(), right());
          break;
        case 4:
        case 11:
          add(right(), top());
          break;
        case 6:
        case 9:
          add(bottom(), top());
          break;
        case 7:
        case 8:
          add(left(), top());
          break;
        case 5:
        case 10: {
          const centreHigh = (a + b + c + d) / 4 >= level;
          // 5: a and c high. Joined through the centre → the lines cut off the low corners b and d.
          const joinHigh = index === 5 ? centreHigh : !centreHigh;
          if (joinHigh) {
            add(bottom(), right());
            add(left(), top());
          } else {
            add(left(), bottom());
            add(right(), top());
          }
          break;
        }
      }
    }
  }
  return segments;
}

/** `count` levels spaced evenly between lower and upper, both excluded (e.g. 5 levels at 1/6 … 5/6). */
export function evenLevels(lower: number, upper: number, count: number): number[] {
  if (!(upper > lower) || !Number.isInteger(count) || count < 1) return [];
  return Array.from({ length: count }, (_, k) => lower + ((k + 1) * (upper - lower)) / (count + 1));
}
