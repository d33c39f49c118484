/**
 * Viewport maths between the screen (CSS pixels of the canvas, origin top left, y down) and image pixels in
 * the FITS convention (FITS Standard 4.0, section 8.1: the centre of the first pixel is at (1, 1); pixel
 * (i, j) covers [i − 0.5, i + 0.5] × [j − 0.5, j + 0.5]; y grows upwards, so row 1 is at the bottom).
 * A view is the image point at the canvas centre and a zoom (screen pixels per image pixel).
 */

export interface View {
  /** Image point (FITS pixels) at the centre of the canvas. */
  centreX: number;
  centreY: number;
  /** Screen pixels per image pixel. */
  zoom: number;
}

export interface Size {
  width: number;
  height: number;
}

export interface Point {
  x: number;
  y: number;
}

export const MIN_ZOOM = 1 / 64;
export const MAX_ZOOM = 64;

export function clampZoom(zoom: number): number {
  return Math.min(MAX_ZOOM, Math.max(MIN_ZOOM, zoom));
}

export function screenToImage(view: View, canvas: Size, screen: Point): Point {
  return {
    x: view.centreX + (screen.x - canvas.width / 2) / view.zoom,
    y: view.centreY - (screen.y - canvas.height / 2) / view.zoom,
  };
}

export function imageToScreen(view: View, canvas: Size, image: Point): Point {
  return {
    x: canvas.width / 2 + (image.x - view.centreX) * view.zoom,
    y: canvas.height / 2 - (image.y - view.centreY) * view.zoom,
  };
}

/** The whole image centred and as large as fits (with `margin` screen pixels on every side). */
export function fitView(image: Size, canvas: Size, margin = 8): View {
  const usableWidth = Math.max(1, canvas.width - 2 * margin);
  const usableHeight = Math.max(1, canvas.height - 2 * margin);
  return {
    centreX: (image.width + 1) / 2,
    centreY: (image.height + 1) / 2,
    zoom: clampZoom(Math.min(usableWidth / image.width, usableHeight / image.height)),
  };
}

/** Zoom by `factor` keeping the image point under `screen` where it is. */
export function zoomAbout(view: View, canvas: Size, screen: Point, factor: number): View {
  const zoom = clampZoom(view.zoom * factor);
  const anchor = screenToImage(view, canvas, screen);
  return {
    zoom,
    centreX: anchor.x - (screen.x - canvas.width / 2) / zoom,
    centreY: anchor.y + (screen.y - canvas.height / 2) / zoom,
  };
}

/** Move the picture by (dx, dy) screen pixels (a drag to the right moves the image right). */
export function panBy(view: View, dx: number, dy: number): View {
  return { zoom: view.zoom, centreX: view.centreX - dx / view.zoom, centreY: view.centreY + dy / view.zoom };
}

/** The nearest whole FITS pixel of an image point, or null outside the image. */
export function pixelUnder(image: Size, point: Point): Point | null {
  const x = Math.round(point.x);
  const y = Math.round(point.y);
  if (x < 1 || y < 1 || x > image.width || y > image.height) return null;
  return { x, y };
}

/**
 * Screen rectangle where an offscreen raster of a block-averaged view (block factor f, view pixel (i, j)
 * covering image pixels [i f + 1, (i + 1) f] in FITS numbering) is drawn: its left edge is at x = 0.5 and its
 * top edge at y = 0.5 + rasterHeight f.
 */
export function rasterRectangle(
  view: View,
  canvas: Size,
  raster: Size,
  factor: number,
): { x: number; y: number; width: number; height: number } {
  const topLeft = imageToScreen(view, canvas, { x: 0.5, y: 0.5 + raster.height * factor });
  return {
    x: topLeft.x,
    y: topLeft.y,
    width: raster.width * factor * view.zoom,
    height: raster.height * factor * view.zoom,
  };
}

/**
 * Index into a block-averaged raster (factor f, row 0 at the bottom) of the view pixel holding FITS image point
 * `point`, or −1 outside the raster.
 */
export function rasterIndex(raster: Size, factor: number, point: Point): number {
  const i = Math.floor((point.x - 0.5) / factor);
  const j = Math.floor((point.y - 0.5) / factor);
  if (i < 0 || j < 0 || i >= raster.width || j >= raster.height) return -1;
  return j * raster.width + i;
}
