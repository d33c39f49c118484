/**
 * target += scale · stamp, with the stamp's central pixel at (cx, cy) of a width × height row-major image;
 * the parts that fall outside the image are skipped. Used to render sources and to keep model images current.
 */
export function addStampToImage(
  target: Float64Array,
  width: number,
  height: number,
  values: Float64Array,
  halfSize: number,
  cx: number,
  cy: number,
  scale: number,
): void {
  const size = 2 * halfSize + 1;
  for (let j = -halfSize; j <= halfSize; j++) {
    const y = cy + j;
    if (y < 0 || y >= height) continue;
    for (let i = -halfSize; i <= halfSize; i++) {
      const x = cx + i;
      if (x < 0 || x >= width) continue;
      const k = y * width + x;
      target[k] = (target[k] as number) + scale * (values[(j + halfSize) * size + (i + halfSize)] as number);
    }
  }
}
