import { describe, expect, it } from 'vitest';

import {
  fitView,
  imageToScreen,
  panBy,
  pixelUnder,
  rasterRectangle,
  screenToImage,
  zoomAbout,
} from '@/viewer/viewport';

const canvas = { width: 800, height: 600 };
const TOL = 1e-9;

describe('viewport', () => {
  it('zooming about the cursor keeps the image point under it fixed', () => {
    const view = { centreX: 100.3, centreY: 57.9, zoom: 1.7 };
    for (const cursor of [
      { x: 0, y: 0 },
      { x: 613.5, y: 71.25 },
      { x: 400, y: 300 },
    ]) {
      for (const factor of [1.25, 0.5, 3]) {
        const before = screenToImage(view, canvas, cursor);
        const after = screenToImage(zoomAbout(view, canvas, cursor, factor), canvas, cursor);
        const diff = Math.hypot(after.x - before.x, after.y - before.y);
        expect(
          diff,
          `cursor ${JSON.stringify(cursor)}, factor ${factor}: moved ${diff} > ${TOL}`,
        ).toBeLessThan(TOL);
      }
    }
  });
  it('screen ↔ image round trip; image y grows upwards (FITS Standard 4.0 §8.1: first pixel centre at 1)', () => {
    const view = { centreX: 10, centreY: 20, zoom: 4 };
    // Canvas centre (400, 300) is the view centre; 4 screen px right = +1 image x; 4 px down = −1 image y.
    expect(screenToImage(view, canvas, { x: 404, y: 304 })).toEqual({ x: 11, y: 19 });
    const p = { x: 3.25, y: -7.5 };
    const back = screenToImage(view, canvas, imageToScreen(view, canvas, p));
    expect(Math.abs(back.x - p.x) + Math.abs(back.y - p.y)).toBeLessThan(TOL);
  });
  it('fit-to-window centres the image at ((w + 1)/2, (h + 1)/2) and shows all of it', () => {
    // 2048 × 1024 image in 800 × 600 less 8 px margins: zoom = min(784/2048, 584/1024) = 0.3828125.
    const view = fitView({ width: 2048, height: 1024 }, canvas);
    expect(view).toEqual({ centreX: 1024.5, centreY: 512.5, zoom: 784 / 2048 });
    const corner = imageToScreen(view, canvas, { x: 0.5, y: 0.5 }); // outer corner of pixel (1, 1)
    expect(Math.abs(corner.x - 8)).toBeLessThan(TOL);
  });
  it('panning follows the drag; pixelUnder rounds to the nearest FITS pixel', () => {
    const moved = panBy({ centreX: 50, centreY: 50, zoom: 2 }, 10, -4);
    expect(moved).toEqual({ centreX: 45, centreY: 48, zoom: 2 });
    expect(pixelUnder({ width: 10, height: 10 }, { x: 0.51, y: 10.49 })).toEqual({ x: 1, y: 10 });
    expect(pixelUnder({ width: 10, height: 10 }, { x: 0.49, y: 5 })).toBeNull();
  });
  it('a block-averaged raster is drawn from the image edge x = 0.5 to 0.5 + w·f', () => {
    const view = { centreX: 512.5, centreY: 512.5, zoom: 0.5 };
    const rect = rasterRectangle(view, canvas, { width: 256, height: 256 }, 4);
    expect(rect).toEqual({ x: 400 - 256, y: 300 - 256, width: 512, height: 512 });
  });
});

describe('raster lookup and markers', () => {
  it('finds the view pixel of a block-averaged raster holding an image point', async () => {
    const { rasterIndex } = await import('@/viewer/viewport');
    // f = 4: FITS pixels 1..4 are view column 0, 5..8 column 1; row likewise.
    expect(rasterIndex({ width: 3, height: 2 }, 4, { x: 4, y: 1 })).toBe(0);
    expect(rasterIndex({ width: 3, height: 2 }, 4, { x: 5, y: 5 })).toBe(3 + 1);
    expect(rasterIndex({ width: 3, height: 2 }, 4, { x: 13, y: 1 })).toBe(-1);
  });
  it('hit-tests beam ellipses with the position angle from +y towards −x', async () => {
    const { sourceAt, screenRotation } = await import('@/viewer/markers');
    // Major axis 10 px (semi-axis 5), minor 2 px (semi-axis 1), PA 90°: the major axis lies along −x/+x.
    const source = { id: 1, x: 50, y: 50, majorPixels: 10, minorPixels: 2, paDeg: 90 };
    expect(sourceAt([source], { x: 54.5, y: 50 })?.id).toBe(1);
    expect(sourceAt([source], { x: 50, y: 54.5 })).toBeNull();
    // PA 0: major axis along +y, which is straight up on screen (rotation −90° in canvas angles).
    expect(Math.abs(screenRotation(0) + Math.PI / 2)).toBeLessThan(1e-12);
    // The nearer of two overlapping markers wins.
    const other = { ...source, id: 2, x: 53 };
    expect(sourceAt([source, other], { x: 52.8, y: 50 })?.id).toBe(2);
  });
});
