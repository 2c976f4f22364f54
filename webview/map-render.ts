/**
 * Pure pixel work for the overlay: sample a map at image pixels through the model-input →
 * image geometry, colour it, and read raw layer values under a point. No DOM here, so it is
 * unit-tested in Node.
 */
import type { DisplayRange, ImageGeometry } from './protocol';

/** Maps a value to a colormap entry 0..255 (colorIndexFor in colormap.ts). */
export type ColorIndex = (v: number) => number;

export interface Grid { data: Float32Array; width: number; height: number }

/**
 * Bilinear sample at continuous coordinates where pixel i covers [i, i+1) (its centre is i+0.5),
 * clamping at the border: the half_pixel convention of the ONNX Resize operator
 * (onnx/docs/Operators.md, Resize: x_original = (x_resized + 0.5) / scale − 0.5).
 */
export function sampleBilinear(g: Grid, x: number, y: number): number {
  const fx = Math.min(Math.max(x - 0.5, 0), g.width - 1);
  const fy = Math.min(Math.max(y - 0.5, 0), g.height - 1);
  const x0 = Math.floor(fx), y0 = Math.floor(fy);
  const x1 = Math.min(x0 + 1, g.width - 1), y1 = Math.min(y0 + 1, g.height - 1);
  const ax = fx - x0, ay = fy - y0;
  const d = g.data, w = g.width;
  const top = d[y0 * w + x0] * (1 - ax) + d[y0 * w + x1] * ax;
  const bottom = d[y1 * w + x0] * (1 - ax) + d[y1 * w + x1] * ax;
  return top * (1 - ay) + bottom * ay;
}

/** Image pixel coordinate → model-input coordinate (inverse of image = offset + model · scale). */
export function imageToModel(geom: ImageGeometry, ix: number, iy: number): [number, number] {
  return [(ix - geom.offsetX) / geom.scaleX, (iy - geom.offsetY) / geom.scaleY];
}

/**
 * RGBA pixels at the image's own size: each image pixel centre is mapped into the map (model-input
 * resolution) and sampled bilinearly; image pixels outside the model input (cropped away) stay
 * transparent. Opacity is applied by the caller (CSS), so alpha is 255 inside.
 */
export function colorizeOntoImage(map: Grid, geom: ImageGeometry, imageWidth: number, imageHeight: number,
  index: ColorIndex, table: Uint8Array): Uint8ClampedArray<ArrayBuffer> {
  const out = new Uint8ClampedArray(imageWidth * imageHeight * 4);
  for (let iy = 0; iy < imageHeight; iy++) {
    const my = (iy + 0.5 - geom.offsetY) / geom.scaleY;
    if (my < 0 || my >= map.height) continue;
    for (let ix = 0; ix < imageWidth; ix++) {
      const mx = (ix + 0.5 - geom.offsetX) / geom.scaleX;
      if (mx < 0 || mx >= map.width) continue;
      const c = index(sampleBilinear(map, mx, my)) * 3;
      const o = (iy * imageWidth + ix) * 4;
      out[o] = table[c]; out[o + 1] = table[c + 1]; out[o + 2] = table[c + 2]; out[o + 3] = 255;
    }
  }
  return out;
}

/** RGBA pixels of a grid at its own resolution (thumbnails; the canvas smooths when scaling). */
export function colorizeGrid(g: Grid, index: ColorIndex, table: Uint8Array): Uint8ClampedArray<ArrayBuffer> {
  const out = new Uint8ClampedArray(g.width * g.height * 4);
  for (let i = 0; i < g.data.length; i++) {
    const c = index(g.data[i]) * 3;
    out[i * 4] = table[c]; out[i * 4 + 1] = table[c + 1]; out[i * 4 + 2] = table[c + 2]; out[i * 4 + 3] = 255;
  }
  return out;
}

export interface RawReadout { cellX: number; cellY: number; value: number; modelX: number; modelY: number }

/**
 * The raw layer-resolution value under an image point: image → model input → layer cell
 * (cell = floor(model · rawSize / modelSize), the cell whose receptive grid square holds the point).
 * Undefined outside the model input.
 */
export function rawValueAt(raw: Grid, modelWidth: number, modelHeight: number, geom: ImageGeometry,
  ix: number, iy: number): RawReadout | undefined {
  const [mx, my] = imageToModel(geom, ix, iy);
  if (mx < 0 || my < 0 || mx >= modelWidth || my >= modelHeight) return undefined;
  const cellX = Math.min(Math.floor((mx * raw.width) / modelWidth), raw.width - 1);
  const cellY = Math.min(Math.floor((my * raw.height) / modelHeight), raw.height - 1);
  return { cellX, cellY, value: raw.data[cellY * raw.width + cellX], modelX: mx, modelY: my };
}

export type RangeMode = 'suggested' | 'max';

/** The display range: the host's suggestion (p99.5 clip) or [min(0,min), max] of the map itself. */
export function displayRange(suggested: DisplayRange, values: Float32Array, mode: RangeMode, symmetric: boolean): DisplayRange {
  let r = suggested;
  if (mode === 'max') {
    let lo = 0, hi = 0;
    for (let i = 0; i < values.length; i++) { const v = values[i]; if (v < lo) lo = v; if (v > hi) hi = v; }
    r = { lo, hi };
  }
  if (symmetric) { const m = Math.max(Math.abs(r.lo), Math.abs(r.hi)); r = { lo: -m, hi: m }; }
  return r;
}

/** One scale for a comparison group: the union of the members' ranges. */
export function sharedRange(ranges: readonly DisplayRange[]): DisplayRange {
  if (ranges.length === 0) return { lo: 0, hi: 1 };
  return { lo: Math.min(...ranges.map((r) => r.lo)), hi: Math.max(...ranges.map((r) => r.hi)) };
}

/** A compact number for legends and read-outs: 3 significant digits, exponent when tiny or huge. */
export function formatValue(v: number): string {
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1e4 || a < 1e-3) return v.toExponential(2).replace('e+', 'e');
  return Number(v.toPrecision(3)).toString();
}
