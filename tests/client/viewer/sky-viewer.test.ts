import { afterEach, describe, expect, it } from 'vitest';
import { flushPromises, mount, type VueWrapper } from '@vue/test-utils';
import { Quasar } from 'quasar';

import SkyViewer from '@/components/viewer/SkyViewer.vue';
import { fitView, imageToScreen, panBy, screenToImage, type View } from '@/viewer/viewport';

// A 64 × 32 view of a 128 × 64 image (block factor 2); value of view pixel k = k / 1000.
const plane = {
  width: 64,
  height: 32,
  factor: 2,
  sourceWidth: 128,
  sourceHeight: 64,
  data: Float32Array.from({ length: 64 * 32 }, (_, k) => k / 1000),
};
const source = {
  id: 7,
  x: 40,
  y: 20,
  majorPixels: 6,
  minorPixels: 4,
  paDeg: 30,
  label: 'AWS J0001',
  details: ['2.1 ± 0.1 mJy'],
};
// happy-dom lays nothing out, so the viewer uses its fallback canvas of 640 × 480.
const canvasSize = { width: 640, height: 480 };

let wrapper: VueWrapper | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

async function mountViewer(props: Record<string, unknown> = {}) {
  wrapper = mount(SkyViewer, {
    attachTo: document.body,
    props: {
      plane,
      unit: 'Jy/beam',
      sources: [source],
      pixelScaleArcsec: 2,
      // A plain linear sky for the readout: 1 pixel = 1/3600°.
      pixelToWorld: (x: number, y: number) => ({ lon: 150 - (x - 1) / 3600, lat: 2 + (y - 1) / 3600 }),
      ...props,
    },
    global: { plugins: [Quasar] },
  });
  await flushPromises();
  return wrapper;
}

function lastView(w: VueWrapper): View {
  const views = w.emitted('update:view') ?? [];
  expect(views.length, 'the viewer reported a view').toBeGreaterThan(0);
  return views[views.length - 1]![0] as View;
}

describe('SkyViewer', () => {
  it('fits the image on mount and reports that view (without a canvas it does not throw)', async () => {
    const w = await mountViewer();
    expect(lastView(w)).toEqual(fitView({ width: 128, height: 64 }, canvasSize));
    // Scale bar: 2″ per image pixel at zoom 624/128 = 4.875 → 0.41″ per screen pixel → ≤ 49″ in 120 px → 30″.
    expect(w.get('[data-test="scale-bar"]').text()).toBe('30″');
  });

  it('reads the pixel, value and sky position under the cursor and shows the marker tooltip', async () => {
    const w = await mountViewer();
    const view = lastView(w);
    const at = imageToScreen(view, canvasSize, { x: 40, y: 20 });
    await w.get('canvas').trigger('pointermove', { clientX: at.x, clientY: at.y });
    const text = w.get('[data-test="readout"]').text();
    // FITS (40, 20) lies in view pixel (floor(39.5/2), floor(19.5/2)) = (19, 9) → k = 9·64 + 19 = 595 → 0.595.
    expect(text).toContain('x 40, y 20');
    expect(text).toContain('0.5950 Jy/beam');
    // lon = 150 − 39/3600 = 149.98917°, lat = 2 + 19/3600 = 2.00528°.
    expect(text).toContain('RA 149.98917°, Dec +2.00528°');
    expect(text).toContain('mean of 2×2');
    expect(w.get('[data-test="marker-tooltip"]').text()).toContain('AWS J0001');
    expect(w.emitted('hover')?.[0]?.[0]).toMatchObject({ id: 7 });
    const cursor = w.emitted('update:cursor')?.at(-1)?.[0] as { x: number; y: number };
    expect(Math.abs(cursor.x - 40) + Math.abs(cursor.y - 20)).toBeLessThan(1e-9);
  });

  it('a click on a marker selects it; a drag pans instead', async () => {
    const w = await mountViewer();
    const view = lastView(w);
    const at = imageToScreen(view, canvasSize, { x: 40.5, y: 20.5 });
    const canvas = w.get('canvas');
    await canvas.trigger('pointerdown', { clientX: at.x, clientY: at.y, pointerId: 1 });
    await canvas.trigger('pointerup', { clientX: at.x, clientY: at.y, pointerId: 1 });
    expect(w.emitted('select')).toEqual([[7]]);

    await canvas.trigger('pointerdown', { clientX: 100, clientY: 100, pointerId: 1 });
    await canvas.trigger('pointermove', { clientX: 130, clientY: 90, pointerId: 1 });
    await canvas.trigger('pointerup', { clientX: 130, clientY: 90, pointerId: 1 });
    expect(lastView(w)).toEqual(panBy(view, 30, -10));
    expect(w.emitted('select')).toHaveLength(1);
  });

  it('wheel zoom keeps the point under the cursor; keys zoom, pan and fit', async () => {
    const w = await mountViewer();
    const fitted = lastView(w);
    const cursor = { x: 150, y: 333 };
    const before = screenToImage(fitted, canvasSize, cursor);
    await w.get('canvas').trigger('wheel', { clientX: cursor.x, clientY: cursor.y, deltaY: -200 });
    const zoomed = lastView(w);
    expect(zoomed.zoom).toBeGreaterThan(fitted.zoom);
    const after = screenToImage(zoomed, canvasSize, cursor);
    expect(Math.hypot(after.x - before.x, after.y - before.y)).toBeLessThan(1e-9);

    const frame = w.get('[role="application"]');
    expect(frame.attributes('tabindex')).toBe('0');
    expect(frame.attributes('aria-label')).toContain('Sky image');
    await frame.trigger('keydown', { key: '+' });
    expect(lastView(w).zoom).toBeCloseTo(zoomed.zoom * 1.25, 12);
    await frame.trigger('keydown', { key: 'ArrowRight' });
    expect(lastView(w).centreX).toBeGreaterThan(zoomed.centreX);
    await frame.trigger('keydown', { key: '0' });
    expect(lastView(w)).toEqual(fitted);
  });

  it('follows a linked view and cursor from another viewer', async () => {
    const w = await mountViewer();
    const shared = { centreX: 10, centreY: 10, zoom: 8 };
    await w.setProps({ view: shared, cursor: { x: 3.2, y: 60.9 } });
    // Scale bar follows the shared zoom: 2″/8 = 0.25″ per screen pixel → ≤ 30″ in 120 px → 30″ (120 px).
    expect(w.get('[data-test="scale-bar"]').text()).toBe('30″');
    expect(w.get('[data-test="readout"]').text()).toContain('x 3, y 61');
  });

  it('refuses typed limits that make no sense, with a plain message', async () => {
    const w = await mountViewer();
    await w.get('input[data-test="lower"], [data-test="lower"] input').setValue('5');
    await w.get('input[data-test="upper"], [data-test="upper"] input').setValue('1');
    await w.get('form').trigger('submit');
    expect(w.get('[data-test="limits-error"]').text()).toBe('The upper limit must be above the lower limit.');
  });

  it('shows a loading state without a plane', async () => {
    const w = await mountViewer({ plane: null });
    expect(w.text()).toContain('Loading pixels');
    expect(w.emitted('update:view')).toBeUndefined();
  });
});

describe('SkyViewer controls', () => {
  it('keeps painting while the asinh softening field is being edited', async () => {
    const w = await mountViewer();
    await w.get('input[data-test="softening"]').setValue('');
    await w.get('input[data-test="softening"]').setValue('-1');
    expect(w.text()).toContain('Point at the image to read values');
    await w.get('[data-test="clip-100"]').trigger('click');
    // min–max of k/1000 for k = 0 … 2047 fills the typed fields with the limits in use.
    expect((w.get('input[data-test="lower"]').element as HTMLInputElement).value).toBe('0');
    expect((w.get('input[data-test="upper"]').element as HTMLInputElement).value).toBe('2.047');
  });
});
