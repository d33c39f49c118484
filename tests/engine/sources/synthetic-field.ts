/**
 * Test scenes with known truth for the source extractor: point sources rendered with the pixel-integrated PSF
 * on a known smooth background, plus Gaussian or Poisson noise from the seeded generator in samples/.
 */
import { addStampToImage, psfStamp, psfStampHalfSize, type Psf } from '../../../server/engine/psf';
import { SeededRandom } from '../../../samples/random';

export interface TrueSource {
  /** 0-based pixel position. */
  x: number;
  y: number;
  flux: number;
}

export interface Scene {
  width: number;
  height: number;
  data: Float64Array;
  background: Float64Array;
  /** Noise-free model. */
  model: Float64Array;
  /** Compact field made from the truth: each flux as a delta at its nearest pixel. */
  compactSky: Float64Array;
  mask: Uint8Array;
}

export function renderSources(
  width: number,
  height: number,
  psf: Psf,
  sources: TrueSource[],
  out: Float64Array,
): void {
  const h = psfStampHalfSize(psf);
  for (const s of sources) {
    const cx = Math.round(s.x);
    const cy = Math.round(s.y);
    addStampToImage(out, width, height, psfStamp(psf, s.x - cx, s.y - cy, h).values, h, cx, cy, s.flux);
  }
}

export function makeScene(options: {
  width: number;
  height: number;
  psf: Psf;
  sources: TrueSource[];
  background: (x: number, y: number) => number;
  noise: { kind: 'gaussian'; sigma: number } | { kind: 'poisson' };
  seed: number;
}): Scene {
  const { width, height, psf, sources } = options;
  const n = width * height;
  const background = new Float64Array(n);
  for (let y = 0; y < height; y++)
    for (let x = 0; x < width; x++) background[y * width + x] = options.background(x, y);
  const model = background.slice();
  renderSources(width, height, psf, sources, model);
  const random = new SeededRandom(options.seed);
  const data = new Float64Array(n);
  const noise = options.noise;
  for (let i = 0; i < n; i++) {
    data[i] =
      noise.kind === 'gaussian'
        ? (model[i] as number) + noise.sigma * random.normal()
        : random.poisson(model[i] as number);
  }
  const compactSky = new Float64Array(n);
  for (const s of sources) {
    const x = Math.round(s.x);
    const y = Math.round(s.y);
    if (x >= 0 && x < width && y >= 0 && y < height)
      compactSky[y * width + x] = (compactSky[y * width + x] as number) + s.flux;
  }
  return { width, height, data, background, model, compactSky, mask: new Uint8Array(n).fill(1) };
}

/** Nearest match within a radius; returns the index into `found` or −1. */
export function nearest<T extends { x: number; y: number }>(
  found: T[],
  x: number,
  y: number,
  radius: number,
): number {
  let best = -1;
  let bestD = radius * radius;
  found.forEach((f, k) => {
    const d = (f.x - x) ** 2 + (f.y - y) ** 2;
    if (d <= bestD) {
      bestD = d;
      best = k;
    }
  });
  return best;
}
