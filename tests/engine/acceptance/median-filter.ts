/**
 * A median-filter background: the median of the valid pixels in a (2r+1)² box around each pixel (the usual
 * simple background estimate the acceptance test compares the diffuse component with).
 */
export function medianFilterBackground(
  data: ArrayLike<number>,
  width: number,
  height: number,
  valid: Uint8Array,
  radius: number,
): Float64Array {
  const out = new Float64Array(width * height);
  const box: number[] = [];
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      box.length = 0;
      for (let yy = Math.max(0, y - radius); yy <= Math.min(height - 1, y + radius); yy++) {
        for (let xx = Math.max(0, x - radius); xx <= Math.min(width - 1, x + radius); xx++) {
          const i = yy * width + xx;
          if (valid[i]) box.push(data[i]!);
        }
      }
      box.sort((a, b) => a - b);
      const n = box.length;
      out[y * width + x] = n === 0 ? 0 : n % 2 ? box[(n - 1) / 2]! : (box[n / 2 - 1]! + box[n / 2]!) / 2;
    }
  }
  return out;
}
