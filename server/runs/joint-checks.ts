/**
 * The joint fit's checks run on the stored headers when a joint run is asked for, so that a request the engine
 * would refuse is answered at once (422) with the engine's own words rather than as a failed run minutes later:
 * size, celestial WCS with square pixels, a supported conversion between the celestial frames, a PSF for every
 * image, units that can be reconciled, and a footprint that overlaps the reference's. The engine
 * (server/engine/joint/separate-joint.ts) repeats all of them, with the pixels, before it fits; what only the
 * pixels can tell (too few valid pixels in the overlap, Poisson data that are not counts) fails the run there.
 */
import type { JointImageOptions } from '../../shared/joint-runs';
import type { ResolvedSeparationSettings } from '../../shared/separation-settings';
import type { HeaderCard } from '../engine/io/header-card';
import { readBeam } from '../engine/io/fits-reader';
import {
  commonGrid,
  frameConversion,
  imageToCommonMap,
  meanPixelScaleDeg,
} from '../engine/joint/common-grid';
import { parseBrightnessUnit, unitGains } from '../engine/joint/units';
import { MIN_IMAGE_SIDE } from '../engine/separate';
import { parseWcs, type Wcs } from '../engine/wcs/wcs';
import { AppError } from '../http/app-error';

export interface JointCheckImage {
  name: string;
  width: number;
  height: number;
  header: HeaderCard[];
  unit: string | null;
  options: JointImageOptions;
}

const refuse = (message: string): never => {
  throw new AppError('unprocessable', message);
};

/** Image i's name as the engine writes it in its messages. */
export const jointImageLabel = (position: number, name: string) => `image ${position} (${name})`;

function celestial(image: JointCheckImage, label: string): Wcs {
  const wcs = parseWcs(image.header);
  if (!wcs || !wcs.isCelestial) {
    refuse(
      `${label} has no celestial WCS (RA/Dec or galactic axes): a joint fit needs every image placed on the sky`,
    );
  }
  const [sx, sy] = wcs!.pixelScaleDeg();
  if (!(sx > 0) || Math.abs(sx - sy) > 0.01 * sx) {
    refuse(`${label}: pixels are not square (${sx}° × ${sy}°); a joint fit needs square pixels`);
  }
  return wcs!;
}

/**
 * Share of image i's pixels (sampled on a grid of at most 64 × 64 points) whose centre falls inside the
 * reference's footprint; 0 means no overlap.
 */
export function overlapFraction(
  map: (x: number, y: number) => [number, number],
  width: number,
  height: number,
  gridWidth: number,
  gridHeight: number,
): number {
  const step = Math.max(1, Math.ceil(Math.max(width, height) / 64));
  let inside = 0;
  let total = 0;
  for (let y = 0; y < height; y += step) {
    for (let x = 0; x < width; x += step) {
      total++;
      const [cx, cy] = map(x, y);
      if (cx >= -0.5 && cy >= -0.5 && cx <= gridWidth - 0.5 && cy <= gridHeight - 0.5) inside++;
    }
  }
  return total > 0 ? inside / total : 0;
}

/**
 * Throws a 422 AppError with the first problem found; when the engine would start fitting, returns the common
 * grid's size (for the storage estimate).
 */
export function checkJointInputs(
  images: JointCheckImage[],
  settings: ResolvedSeparationSettings,
): { gridWidth: number; gridHeight: number } {
  const labels = images.map((image, i) => jointImageLabel(i + 1, image.name));
  images.forEach((image, i) => {
    if (image.width < MIN_IMAGE_SIDE || image.height < MIN_IMAGE_SIDE) {
      refuse(
        `${labels[i]} is ${image.width} × ${image.height} pixels; separation needs at least ${MIN_IMAGE_SIDE} × ${MIN_IMAGE_SIDE}`,
      );
    }
  });
  const wcss = images.map((image, i) => celestial(image, labels[i]!));
  const ref = images[0]!;
  const refWcs = wcss[0]!;
  const engine = (fn: () => void) => {
    try {
      fn();
    } catch (error) {
      refuse(error instanceof Error ? error.message : String(error));
    }
  };
  for (let i = 1; i < images.length; i++)
    engine(() => frameConversion(refWcs, wcss[i]!, [labels[0]!, labels[i]!]));
  images.forEach((image, i) => {
    const psf = image.options.psf ?? (i === 0 ? settings.psf : null);
    if (!psf && !readBeam(image.header)) {
      refuse(
        `${labels[i]}: no PSF (no BMAJ/BMIN/BPA in its header and none given); give its PSF FWHMs in its own pixels`,
      );
    }
  });
  engine(() => {
    const units = images.map((image) => parseBrightnessUnit(image.options.unit ?? image.unit ?? ''));
    // Only whether the units can be reconciled matters here; the beam areas change the gains, not that.
    unitGains(
      units.map((unit) => ({ unit, beamAreaPx: 1, pixelSteradian: 1 })),
      labels,
    );
  });
  const finest = Math.min(...wcss.map(meanPixelScaleDeg));
  let grid: ReturnType<typeof commonGrid> | undefined;
  engine(() => {
    grid = commonGrid(refWcs, ref.width, ref.height, finest);
  });
  for (let i = 1; i < images.length; i++) {
    const map = imageToCommonMap(grid!, wcss[i]!, [labels[0]!, labels[i]!]);
    const share = overlapFraction(map, images[i]!.width, images[i]!.height, grid!.width, grid!.height);
    if (share === 0) {
      refuse(
        `${labels[i]} does not overlap the footprint of the reference image (${labels[0]}): nothing to fit jointly`,
      );
    }
  }
  return { gridWidth: grid!.width, gridHeight: grid!.height };
}
