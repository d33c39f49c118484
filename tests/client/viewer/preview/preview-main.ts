/**
 * Preview page of the sky viewer for the screenshot script (screenshot.ts): two linked viewers of an invented
 * 2048² "Lyra Deep Field" plane (smooth diffuse blob + beam-sized sources + noise + a blank corner), markers and
 * contours of the diffuse part. Served by `vite` from the project root; not part of the app build.
 */
import { createApp, defineComponent, h, ref } from 'vue';
import { Quasar } from 'quasar';
import '@quasar/extras/roboto-font/roboto-font.css';
import '@quasar/extras/material-icons/material-icons.css';
import 'quasar/dist/quasar.css';

import SkyViewer from '@/components/viewer/SkyViewer.vue';
import type { ViewerSource } from '@/viewer/markers';
import { clipLimits, orderStatistics } from '@/viewer/limits';
import { paintPlane } from '@/viewer/render-plane';
import { makeStretch } from '@/viewer/stretch';
import { panBy, rasterRectangle, type Point, type View } from '@/viewer/viewport';

const N = 2048;
const BEAM = 6; // FWHM in pixels
let seed = 12345;
function random(): number {
  seed = (seed * 1103515245 + 12345) % 2147483648;
  return seed / 2147483648;
}
function gauss(): number {
  return Math.sqrt(-2 * Math.log(random() + 1e-12)) * Math.cos(2 * Math.PI * random());
}

const diffuse = new Float32Array(N * N);
const data = new Float32Array(N * N);
for (let y = 0; y < N; y++) {
  for (let x = 0; x < N; x++) {
    const dx = (x - 900) / 420;
    const dy = (y - 1150) / 300;
    const ex = (x - 1500) / 200;
    const ey = (y - 600) / 260;
    diffuse[y * N + x] = 0.8 * Math.exp(-(dx * dx + dy * dy) / 2) + 0.4 * Math.exp(-(ex * ex + ey * ey) / 2);
  }
}
const sources: ViewerSource[] = [];
const sigma = BEAM / 2.3548;
for (let k = 0; k < 60; k++) {
  const sx = 50 + random() * (N - 100);
  const sy = 50 + random() * (N - 100);
  const flux = 0.2 + 3 * random() ** 3;
  sources.push({
    id: k + 1,
    x: sx + 1,
    y: sy + 1,
    majorPixels: BEAM,
    minorPixels: BEAM,
    paDeg: 0,
    label: `AWS J1830${String(k).padStart(2, '0')}`,
    details: [`${flux.toFixed(2)} mJy/beam peak`],
  });
  for (let y = Math.max(0, Math.floor(sy - 20)); y < Math.min(N, sy + 20); y++) {
    for (let x = Math.max(0, Math.floor(sx - 20)); x < Math.min(N, sx + 20); x++) {
      const r2 = (x - sx) ** 2 + (y - sy) ** 2;
      diffuse[y * N + x]! += 0; // the diffuse plane stays smooth
      data[y * N + x]! += flux * Math.exp(-r2 / (2 * sigma * sigma));
    }
  }
}
for (let i = 0; i < N * N; i++) data[i] = data[i]! + diffuse[i]! + 0.02 * gauss();
for (let y = N - 200; y < N; y++) for (let x = 0; x < 260; x++) data[y * N + x] = NaN;

const plane = { width: N, height: N, factor: 1, sourceWidth: N, sourceHeight: N, data };
const contourPlane = { ...plane, data: diffuse };
// A linear stand-in for the WCS: 1.5″ pixels, centre at RA 277.5°, Dec +36.2°.
const scale = 1.5 / 3600;
const pixelToWorld = (x: number, y: number) => ({
  lon: 277.5 - ((x - 1024.5) * scale) / Math.cos((36.2 * Math.PI) / 180),
  lat: 36.2 + (y - 1024.5) * scale,
});

/** Timings the screenshot script prints: painting the 2048² raster and one view-transformed redraw. */
function measure(): Record<string, number> {
  const canvas = document.createElement('canvas');
  canvas.width = N;
  canvas.height = N;
  const context = canvas.getContext('2d')!;
  const image = context.createImageData(N, N);
  const stretch = makeStretch({ lower: -0.05, upper: 2 }, { stretch: 'asinh' });
  const paints: number[] = [];
  for (let k = 0; k < 3; k++) {
    const t0 = performance.now();
    paintPlane(plane, stretch, 'ember', image.data);
    context.putImageData(image, 0, 0);
    paints.push(performance.now() - t0);
  }
  const screen = document.createElement('canvas');
  screen.width = 900;
  screen.height = 600;
  const target = screen.getContext('2d', { willReadFrequently: true })!;
  let view: View = { centreX: 1024, centreY: 1024, zoom: 0.8 };
  const draws: number[] = [];
  for (let k = 0; k < 30; k++) {
    view = panBy(view, 7, 3);
    const t0 = performance.now();
    const rect = rasterRectangle(view, { width: 900, height: 600 }, plane, 1);
    target.clearRect(0, 0, 900, 600);
    target.drawImage(canvas, rect.x, rect.y, rect.width, rect.height);
    target.getImageData(0, 0, 1, 1); // forces the draw to finish
    draws.push(performance.now() - t0);
  }
  const t0 = performance.now();
  clipLimits(orderStatistics(plane.data), 99.5);
  const sortMs = performance.now() - t0;
  const median = (v: number[]) => [...v].sort((a, b) => a - b)[Math.floor(v.length / 2)]!;
  return { paintMedianMs: median(paints), redrawMedianMs: median(draws), limits995Ms: sortMs };
}

const Preview = defineComponent({
  setup() {
    const view = ref<View | null>(null);
    const cursor = ref<Point | null>(null);
    const selected = ref<number | string | null>(5);
    return () =>
      h('div', { style: 'display: grid; grid-template-columns: 1fr 1fr; gap: 12px; padding: 12px' }, [
        h(SkyViewer, {
          plane,
          unit: 'mJy/beam',
          pixelToWorld,
          pixelScaleArcsec: 1.5,
          sources,
          selectedId: selected.value,
          label: 'Lyra Deep Field, data',
          view: view.value,
          cursor: cursor.value,
          height: '560px',
          'onUpdate:view': (v: View) => (view.value = v),
          'onUpdate:cursor': (c: Point | null) => (cursor.value = c),
          onSelect: (id: number | string) => (selected.value = id),
        }),
        h(SkyViewer, {
          plane,
          unit: 'mJy/beam',
          pixelToWorld,
          pixelScaleArcsec: 1.5,
          sources,
          selectedId: selected.value,
          contourPlane,
          initialStretch: 'linear',
          initialColourMap: 'tidepool',
          label: 'Lyra Deep Field, data with diffuse contours',
          view: view.value,
          cursor: cursor.value,
          height: '560px',
          'onUpdate:view': (v: View) => (view.value = v),
          'onUpdate:cursor': (c: Point | null) => (cursor.value = c),
          onSelect: (id: number | string) => (selected.value = id),
        }),
      ]);
  },
});

createApp(Preview).use(Quasar).mount('#app');
(window as unknown as { skyViewerPreview: unknown }).skyViewerPreview = { measure, sources };
