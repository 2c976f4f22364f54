/**
 * Synthetic panel data for the browser tests: the parts scenario's eight labels (DESIGN §8), a
 * rendered belt image with a washer on it, four stages and Gaussian-blob maps whose values are
 * known in closed form, so a read-out in the page can be checked against them.
 */
import sharp from 'sharp';
import { encodeFloat32Base64 } from '../../../webview/float32-base64';
import type { ImageGeometry, InitMessage, LayerInfo, MapData, MapKind, MapVariant, Prediction } from '../../../webview/protocol';

export const LABELS = ['hex-nut', 'washer', 'bearing', 'spring', 'bolt', 'gear', 'clip', 'bracket'];
export const idx = (label: string): number => LABELS.indexOf(label);

/** Model input side (square), and the four stages with their grid sizes, shallow to deep. */
export const MODEL = 96;
export const STAGES: { id: string; short: string; grid: number }[] = [
  { id: '/stem/relu/Relu_output_0', short: 'stem', grid: 24 },
  { id: '/block1/add/Add_output_0', short: 'block1', grid: 12 },
  { id: '/block2/add/Add_output_0', short: 'block2', grid: 6 },
  { id: '/block3/add/Add_output_0', short: 'block3', grid: 3 },
];
const EXTRA_LAYERS: LayerInfo[] = [
  { id: '/block1/conv1/Conv_output_0', short: 'block1.conv1', gridWidth: 12, gridHeight: 12, stage: false },
];

/** 320×240 image letterboxed into the 96×96 input: scale 96/320, 12 px of padding top and bottom. */
export const IMAGE_W = 320;
export const IMAGE_H = 240;
export const GEOMETRY: ImageGeometry = { kind: 'letterbox', scaleX: IMAGE_W / MODEL, scaleY: IMAGE_W / MODEL, offsetX: 0, offsetY: -12 * (IMAGE_W / MODEL) };
/** Where the washer sits in the image. */
export const WASHER = { x: 200, y: 130 };

export const PREDICTION: Prediction[] = [
  ['washer', 0.62], ['bearing', 0.27], ['hex-nut', 0.05], ['gear', 0.025], ['clip', 0.015], ['spring', 0.01], ['bolt', 0.006], ['bracket', 0.004],
].map(([l, p]) => ({ index: idx(l as string), label: l as string, p: p as number }));

export async function renderSceneImage(): Promise<string> {
  const px = Buffer.alloc(IMAGE_W * IMAGE_H * 3);
  for (let y = 0; y < IMAGE_H; y++) {
    for (let x = 0; x < IMAGE_W; x++) {
      const belt = 92 + 10 * Math.sin(y * 0.9) + 6 * ((x * 7 + y * 13) % 5) + (y % 24 < 2 ? -25 : 0);
      const light = 1 - 0.25 * (((x - 160) / 200) ** 2 + ((y - 120) / 180) ** 2);
      let r = belt * light, g = belt * light * 1.02, b = belt * light * 1.08;
      const d = Math.hypot(x - WASHER.x, y - WASHER.y);
      if (d < 36 && d > 14) { const s = 190 - (d - 25) ** 2 * 0.6 + (x - WASHER.x) * 0.8; r = s; g = s; b = s * 0.96; }
      // a bolt, partly out of frame, as clutter
      const along = (x - 60) * 0.8 + (y - 70) * 0.6, across = -(x - 60) * 0.6 + (y - 70) * 0.8;
      if (Math.abs(across) < 7 && along > -50 && along < 40) { const s = 150 + across * 4; r = s * 0.9; g = s * 0.85; b = s * 0.7; }
      const o = (y * IMAGE_W + x) * 3;
      px[o] = Math.max(0, Math.min(255, r)); px[o + 1] = Math.max(0, Math.min(255, g)); px[o + 2] = Math.max(0, Math.min(255, b));
    }
  }
  const png = await sharp(px, { raw: { width: IMAGE_W, height: IMAGE_H, channels: 3 } }).png().toBuffer();
  return `data:image/png;base64,${png.toString('base64')}`;
}

export async function initMessage(): Promise<InitMessage> {
  return {
    type: 'init', version: 1,
    model: { name: 'parts-sorter.onnx', scores: 'logits' },
    image: { uri: await renderSceneImage(), name: 'belt-0417.png', width: IMAGE_W, height: IMAGE_H, geometry: GEOMETRY },
    labels: LABELS,
    prediction: PREDICTION,
    expected: idx('bearing'),
    // graph order, shallow to deep: the extra layer sits inside block1
    layers: [...STAGES.map((s) => ({ id: s.id, short: s.short, gridWidth: s.grid, gridHeight: s.grid, stage: true }))].flatMap((l, i) => (i === 1 ? [...EXTRA_LAYERS, l] : [l])),
    settings: { preprocessing: { width: MODEL, height: MODEL, resize: 'letterbox', channels: 'RGB', layout: 'NCHW', scale: 1 / 255, mean: [0.5, 0.5, 0.5], std: [0.25, 0.25, 0.25] }, labelsFile: 'parts.labels.txt' },
  };
}

export interface MapQuestion { kind: MapKind; variant?: MapVariant; fact: number; foil?: number }

/** The blob a question gets, in model-input pixels: centred on the washer, shifted per foil, wider at shallow layers. */
export function blobOf(q: MapQuestion, layerGrid: number): { cx: number; cy: number; sigma: number; amp: number } {
  const [mx, my] = [(WASHER.x - GEOMETRY.offsetX) / GEOMETRY.scaleX, (WASHER.y - GEOMETRY.offsetY) / GEOMETRY.scaleY];
  const shift = q.foil === undefined ? 0 : (q.foil - 3) * 4;
  const amp = q.kind === 'mismatch' ? 0.004 : 1 + q.fact * 0.1 + (q.foil ?? 0) * 0.05;
  return { cx: mx + shift, cy: my, sigma: 6 + 48 / layerGrid, amp };
}

/** The raw value of a layer cell: the blob evaluated at the cell's centre (in model pixels). */
export function rawCellValue(q: MapQuestion, grid: number, cellX: number, cellY: number): number {
  const b = blobOf(q, grid);
  const cell = MODEL / grid;
  const x = (cellX + 0.5) * cell, y = (cellY + 0.5) * cell;
  return b.amp * Math.exp(-((x - b.cx) ** 2 + (y - b.cy) ** 2) / (2 * b.sigma ** 2));
}

let nextMapId = 1;

export function synthMap(q: MapQuestion, layer: { id: string; short: string; grid: number }, estimate?: { mode: 'exact' | 'probe'; k?: number }, note?: string): MapData {
  const b = blobOf(q, layer.grid);
  const values = new Float32Array(MODEL * MODEL);
  for (let y = 0; y < MODEL; y++) for (let x = 0; x < MODEL; x++) {
    values[y * MODEL + x] = b.amp * Math.exp(-((x + 0.5 - b.cx) ** 2 + (y + 0.5 - b.cy) ** 2) / (2 * b.sigma ** 2));
  }
  const raw = new Float32Array(layer.grid * layer.grid);
  for (let y = 0; y < layer.grid; y++) for (let x = 0; x < layer.grid; x++) raw[y * layer.grid + x] = rawCellValue(q, layer.grid, x, y);
  return {
    mapId: `m${nextMapId++}`, kind: q.kind, variant: q.variant, layer: layer.id, layerShort: layer.short,
    fact: q.fact, foil: q.foil, width: MODEL, height: MODEL, values: encodeFloat32Base64(values),
    rawWidth: layer.grid, rawHeight: layer.grid, raw: encodeFloat32Base64(raw),
    range: { lo: 0, hi: b.amp * 0.98 }, estimate, note,
  };
}
