/**
 * Linking sky viewers of images on different pixel grids (the inputs of a joint run): a view or cursor in image
 * A's FITS pixels is carried to image B's through the two WCSs (pixel → RA/Dec → pixel, with the frame
 * conversion the joint fit itself uses), and the zoom by the ratio of the pixel scales, so the same patch of sky
 * fills the same screen area in both.
 */
import type { HeaderCardDto } from '@shared/images';
import { frameConversion, meanPixelScaleDeg } from '../../../server/engine/joint/common-grid';
import { parseWcs } from '../../../server/engine/wcs/wcs';
import type { Point, View } from '@/viewer/viewport';

export interface GridLink {
  view(view: View): View | null;
  point(point: Point): Point | null;
}

/** The map from image A's pixels to image B's, or null when either has no celestial WCS or no conversion. */
export function gridLink(from: readonly HeaderCardDto[], to: readonly HeaderCardDto[]): GridLink | null {
  const a = parseWcs(from);
  const b = parseWcs(to);
  if (!a?.isCelestial || !b?.isCelestial) return null;
  let convert: (lon: number, lat: number) => [number, number];
  try {
    convert = frameConversion(a, b, ['image A', 'image B']);
  } catch {
    return null;
  }
  const ratio = meanPixelScaleDeg(b) / meanPixelScaleDeg(a);
  const point = (p: Point): Point | null => {
    const [lon, lat] = a.pixelToWorld(p.x, p.y);
    if (!Number.isFinite(lon) || !Number.isFinite(lat)) return null;
    const [l2, b2] = convert(lon, lat);
    const [x, y] = b.worldToPixel(l2, b2);
    return Number.isFinite(x) && Number.isFinite(y) ? { x, y } : null;
  };
  return {
    point,
    view(view) {
      const centre = point({ x: view.centreX, y: view.centreY });
      return centre ? { centreX: centre.x, centreY: centre.y, zoom: view.zoom * ratio } : null;
    },
  };
}
