/**
 * Grouping the MAP compact field into source candidates (METHOD-NOTES, "Catalogue accuracy").
 *
 * 1. The compact excess e = max(u − pedestal, 0) (u's "off" pixels hold the pedestal q/α, not sky).
 * 2. The grouping image G = PSF ⊛ e: the compact field as the telescope sees it. Its connected regions above a
 *    floor are the footprints; grouping G rather than raw "on" pixels keeps the small shape pixels that the MAP
 *    fit puts beside bright sources inside that source's footprint.
 * 3. Inside a footprint, blends are split at the local maxima of a lightly smoothed field L = K ⊛ e, with K a
 *    Gaussian of half the PSF's FWHM. Two sources at distance d show two maxima in L when d exceeds about twice
 *    the combined width of K and of each source's spread in u, which keeps pairs 1 FWHM apart separate; a plain
 *    threshold on G would merge them.
 * 4. Maxima closer than `mergeRadiusPx` are merged (the brighter stays), and each seed gets a start position
 *    (parabolic sub-pixel peak of L) and a start flux (the excess of the footprint pixels nearest to it).
 * Convolutions run on a zero-padded grid (goodFftSize) so nothing wraps around the image edges.
 */
import { createConvolver, goodFftSize, supportsFloat32 } from '../fft';
import { psfFromFwhm, psfFwhmPx, psfKernelOnGrid, psfStampHalfSize, type Psf } from '../psf';

export interface SourceSeed {
  /** 0-based pixel position of the start guess. */
  x: number;
  y: number;
  /** Start flux: the compact excess of the footprint pixels nearest to this seed. */
  flux: number;
  /** Index of the footprint (connected region of G above the floor) the seed lies in. */
  footprint: number;
  /** Value of G at the seed pixel. */
  groupingPeak: number;
}

export interface GroupingResult {
  seeds: SourceSeed[];
  /** Number of seeds in each footprint (by footprint index). */
  seedsPerFootprint: number[];
  /** G = PSF ⊛ e on the image grid. */
  grouping: Float64Array;
}

export interface GroupingOptions {
  /** Footprint floor on G (image units). */
  floor: number | Float64Array | Float32Array;
  /** Minimum G at a seed (image units); may be a per-pixel map. */
  seedLevel: number | Float64Array | Float32Array;
  /** Seeds closer than this (pixels) are merged. */
  mergeRadiusPx: number;
}

/** Convolves an image with a PSF on a zero-padded FFT grid; returns the image-sized result (float32 accuracy). */
export function convolveOnPaddedGrid(
  image: Float64Array | Float32Array,
  width: number,
  height: number,
  psf: Psf,
): Float64Array {
  const pad = Math.min(psfStampHalfSize(psf), 256);
  const pw = goodFftSize(width + 2 * pad);
  const ph = goodFftSize(height + 2 * pad);
  const padded = new Float64Array(pw * ph);
  for (let y = 0; y < height; y++) padded.set(image.subarray(y * width, (y + 1) * width), y * pw);
  // float32 where the grid allows (fused transforms, fft/types.ts: no float64 spectra, about half the memory and
  // time); the grouping levels are fractions of a threshold, far above float32 rounding.
  const convolver = createConvolver(pw, ph, psfKernelOnGrid(psf, pw, ph), {
    precision: supportsFloat32(pw, ph) ? 'float32' : 'float64',
  });
  try {
    convolver.apply(padded, padded);
  } finally {
    convolver.dispose();
  }
  const out = new Float64Array(width * height);
  for (let y = 0; y < height; y++) out.set(padded.subarray(y * pw, y * pw + width), y * width);
  return out;
}

/** The light smoothing kernel K: a Gaussian with half the PSF's FWHMs (same position angle for Gaussian PSFs). */
export function splittingKernel(psf: Psf): Psf {
  if (psf.kind === 'gaussian') {
    return psfFromFwhm(psf.fwhmMajorPx / 2, psf.fwhmMinorPx / 2, psf.paDeg, psf.eastLeft);
  }
  const f = psfFwhmPx(psf);
  const mean = Math.sqrt(f.major * f.minor) / 2;
  return psfFromFwhm(Math.max(mean, 0.1), Math.max(mean, 0.1), 0);
}

function levelAt(level: number | Float64Array | Float32Array, i: number): number {
  return typeof level === 'number' ? level : (level[i] as number);
}

export function groupCompactField(
  excess: Float64Array | Float32Array,
  width: number,
  height: number,
  valid: Uint8Array,
  psf: Psf,
  options: GroupingOptions,
): GroupingResult {
  const grouping = convolveOnPaddedGrid(excess, width, height, psf);
  const light = convolveOnPaddedGrid(excess, width, height, splittingKernel(psf));

  // Footprints: 8-connected regions of G above the floor (valid pixels only), by an explicit-stack flood fill.
  const label = new Int32Array(width * height).fill(-1);
  const stack: number[] = [];
  let footprints = 0;
  for (let start = 0; start < label.length; start++) {
    if (label[start] !== -1 || !valid[start] || (grouping[start] as number) <= levelAt(options.floor, start))
      continue;
    label[start] = footprints;
    stack.push(start);
    while (stack.length > 0) {
      const p = stack.pop() as number;
      const px = p % width;
      const py = (p - px) / width;
      for (let dy = -1; dy <= 1; dy++) {
        const ny = py + dy;
        if (ny < 0 || ny >= height) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const nx = px + dx;
          if (nx < 0 || nx >= width) continue;
          const q = ny * width + nx;
          if (label[q] !== -1 || !valid[q] || (grouping[q] as number) <= levelAt(options.floor, q)) continue;
          label[q] = footprints;
          stack.push(q);
        }
      }
    }
    footprints++;
  }

  // Local maxima of L inside footprints (ties broken by index so a flat top gives one maximum).
  const candidates: { index: number; value: number }[] = [];
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      if ((label[i] as number) < 0 || (grouping[i] as number) < levelAt(options.seedLevel, i)) continue;
      const v = light[i] as number;
      let isMax = v > 0;
      for (let dy = -1; dy <= 1 && isMax; dy++) {
        const ny = y + dy;
        if (ny < 0 || ny >= height) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const nx = x + dx;
          if ((dx === 0 && dy === 0) || nx < 0 || nx >= width) continue;
          const q = ny * width + nx;
          const w = light[q] as number;
          if (w > v || (w === v && q < i)) {
            isMax = false;
            break;
          }
        }
      }
      if (isMax) candidates.push({ index: i, value: v });
    }
  }
  candidates.sort((a, b) => b.value - a.value || a.index - b.index);

  const seeds: SourceSeed[] = [];
  const r2 = options.mergeRadiusPx * options.mergeRadiusPx;
  for (const c of candidates) {
    const cx = c.index % width;
    const cy = (c.index - cx) / width;
    const at = (x: number, y: number): number =>
      x >= 0 && x < width && y >= 0 && y < height ? (light[y * width + x] as number) : c.value;
    // Parabolic sub-pixel peak on each axis, limited to half a pixel.
    const sub = (m: number, p: number): number => {
      const denom = m - 2 * c.value + p;
      return denom < 0 ? Math.max(-0.5, Math.min(0.5, (0.5 * (m - p)) / denom)) : 0;
    };
    const x = cx + sub(at(cx - 1, cy), at(cx + 1, cy));
    const y = cy + sub(at(cx, cy - 1), at(cx, cy + 1));
    if (seeds.some((s) => (s.x - x) ** 2 + (s.y - y) ** 2 < r2)) continue;
    seeds.push({
      x,
      y,
      flux: 0,
      footprint: label[c.index] as number,
      groupingPeak: grouping[c.index] as number,
    });
  }

  // Start fluxes: each footprint pixel's excess goes to the nearest seed of its footprint.
  const byFootprint: number[][] = Array.from({ length: footprints }, () => []);
  seeds.forEach((s, k) => byFootprint[s.footprint]?.push(k));
  for (let i = 0; i < label.length; i++) {
    const f = label[i] as number;
    if (f < 0) continue;
    const members = byFootprint[f] as number[];
    if (members.length === 0) continue;
    const px = i % width;
    const py = (i - px) / width;
    let best = members[0] as number;
    let bestD = Infinity;
    for (const k of members) {
      const s = seeds[k] as SourceSeed;
      const d = (s.x - px) ** 2 + (s.y - py) ** 2;
      if (d < bestD) {
        bestD = d;
        best = k;
      }
    }
    (seeds[best] as SourceSeed).flux += excess[i] as number;
  }
  return { seeds, seedsPerFootprint: byFootprint.map((m) => m.length), grouping };
}
