/**
 * Drawing maps: a map at model-input resolution (or any grid covering the whole model input) is
 * carried back through the preprocessing Geometry onto the ORIGINAL image at its original size,
 * upsampled bilinearly, coloured, alpha-blended and encoded as PNG.
 */
import sharp from 'sharp';
import type { DecodedImage } from './decode';
import type { Geometry } from './preprocess';
import { originalToInput } from './preprocess';
import { applyColormap, colormapIndexer, colormapTable, type ColormapName } from './colormap';
import type { DisplayRange } from './normalize';

/** A single-channel map, row-major, `height` × `width`, covering the whole model input. */
export interface MapGrid {
  data: Float32Array;
  width: number;
  height: number;
}

export interface OverlayOptions {
  colormap: ColormapName;
  /** Weight of the map colour over the image, 0..1. */
  opacity: number;
  range: DisplayRange;
  /**
   * Brightness of original pixels the model never saw (outside the centre crop), 0..1
   * (default 0.5): they get no colour, and dimming tells them apart from "no evidence".
   */
  outsideBrightness?: number;
}

interface AxisTaps {
  i0: Int32Array;
  i1: Int32Array;
  w1: Float32Array;
  inside: Uint8Array;
}

/**
 * Bilinear taps along one axis, ONNX Resize `linear` with `half_pixel` coordinates (DESIGN §4):
 * the centre of original pixel X, X + 0.5, goes through the geometry to model-input coordinate u,
 * then to map coordinate m = u · mapSize / inputSize − 0.5, and is interpolated between
 * floor(m) and floor(m) + 1. m is clamped to the map cells whose centres lie inside the image
 * content (`contentLo`..`contentHi` in input coordinates): for stretch and crop that is ONNX's
 * edge clamp; for letterbox it keeps pure-padding cells from bleeding into the image border.
 */
function axisTaps(
  origSize: number,
  toInput: (x: number) => number,
  inputSize: number,
  mapSize: number,
  srcLo: number,
  srcHi: number,
  contentLo: number,
  contentHi: number,
): AxisTaps {
  const i0 = new Int32Array(origSize);
  const i1 = new Int32Array(origSize);
  const w1 = new Float32Array(origSize);
  const inside = new Uint8Array(origSize);
  const k = mapSize / inputSize;
  let mLo = Math.max(0, Math.ceil(contentLo * k - 0.5));
  let mHi = Math.min(mapSize - 1, Math.floor(contentHi * k - 0.5));
  if (mLo > mHi) mLo = mHi = Math.min(mapSize - 1, Math.max(0, Math.floor(((contentLo + contentHi) / 2) * k)));
  for (let x = 0; x < origSize; x++) {
    const c = x + 0.5;
    inside[x] = c >= srcLo && c < srcHi ? 1 : 0;
    const m = Math.min(mHi, Math.max(mLo, toInput(c) * k - 0.5));
    const f = Math.floor(m);
    const frac = m - f;
    i0[x] = Math.min(mapSize - 1, Math.max(0, f));
    i1[x] = Math.min(mapSize - 1, Math.max(0, f + 1));
    w1[x] = frac;
  }
  return { i0, i1, w1, inside };
}

function tapsForGeometry(map: MapGrid, g: Geometry): { xs: AxisTaps; ys: AxisTaps } {
  const { source: s, target: t } = g;
  const xs = axisTaps(g.original.width, (x) => originalToInput(g, x, 0)[0], g.input.width, map.width, s.x, s.x + s.width, t.x, t.x + t.width);
  const ys = axisTaps(g.original.height, (y) => originalToInput(g, 0, y)[1], g.input.height, map.height, s.y, s.y + s.height, t.y, t.y + t.height);
  return { xs, ys };
}

/** Interpolated map value at original pixel row y into `row` (NaN outside the model's view). */
function sampleRow(map: MapGrid, xs: AxisTaps, ys: AxisTaps, y: number, row: Float32Array): void {
  const d = map.data;
  const mw = map.width;
  const r0 = ys.i0[y] * mw;
  const r1 = ys.i1[y] * mw;
  const wy = ys.w1[y];
  const rowInside = ys.inside[y] === 1;
  for (let x = 0; x < row.length; x++) {
    if (!rowInside || xs.inside[x] === 0) {
      row[x] = NaN;
      continue;
    }
    const a = xs.i0[x];
    const b = xs.i1[x];
    const wx = xs.w1[x];
    const top = d[r0 + a] + wx * (d[r0 + b] - d[r0 + a]);
    const bottom = d[r1 + a] + wx * (d[r1 + b] - d[r1 + a]);
    row[x] = top + wy * (bottom - top);
  }
}

/**
 * The map resampled onto the original image (original width × height, row-major), NaN where the
 * model saw nothing of the image (outside a centre crop). For read-outs and scoring at image size.
 */
export function upsampleMapToOriginal(map: MapGrid, g: Geometry): Float32Array {
  const { xs, ys } = tapsForGeometry(map, g);
  const W = g.original.width;
  const out = new Float32Array(W * g.original.height);
  for (let y = 0; y < g.original.height; y++) sampleRow(map, xs, ys, y, out.subarray(y * W, (y + 1) * W));
  return out;
}

/** The overlay as interleaved 8-bit RGB at the original image size. */
export function renderOverlayRgb(img: DecodedImage, map: MapGrid, g: Geometry, opts: OverlayOptions): Uint8Array {
  if (g.original.width !== img.width || g.original.height !== img.height) {
    throw new Error(`renderOverlay: geometry is for ${g.original.width}×${g.original.height}, image is ${img.width}×${img.height}`);
  }
  if (map.data.length !== map.width * map.height) throw new Error('renderOverlay: map data does not match its width × height');
  const table = colormapTable(opts.colormap);
  const alpha = Math.min(1, Math.max(0, opts.opacity));
  const dim = Math.min(1, Math.max(0, opts.outsideBrightness ?? 0.5));
  const index = colormapIndexer(opts.range.lo, opts.range.hi, opts.colormap);
  const { xs, ys } = tapsForGeometry(map, g);
  const W = img.width;
  const src = img.rgb;
  const out = new Uint8Array(src.length);
  const row = new Float32Array(W);
  // Straight alpha blend, out = round((1 − α)·image + α·colour), with both terms tabulated: the
  // image term per 8-bit level, the colour term per table entry (+0.5 so truncation rounds).
  const imageTerm = new Float64Array(256);
  const dimmed = new Uint8Array(256);
  for (let v = 0; v < 256; v++) {
    imageTerm[v] = (1 - alpha) * v;
    dimmed[v] = Math.round(v * dim);
  }
  const colourTerm = new Float64Array(768);
  for (let i = 0; i < 768; i++) colourTerm[i] = alpha * table[i] + 0.5;
  for (let y = 0; y < img.height; y++) {
    sampleRow(map, xs, ys, y, row);
    const rowSeen = ys.inside[y] === 1;
    let p = y * W * 3;
    for (let x = 0; x < W; x++, p += 3) {
      if (!rowSeen || xs.inside[x] === 0) {
        // Not seen by the model: dimmed, uncoloured.
        out[p] = dimmed[src[p]];
        out[p + 1] = dimmed[src[p + 1]];
        out[p + 2] = dimmed[src[p + 2]];
        continue;
      }
      const c = index(row[x]) * 3;
      out[p] = (imageTerm[src[p]] + colourTerm[c]) | 0;
      out[p + 1] = (imageTerm[src[p + 1]] + colourTerm[c + 1]) | 0;
      out[p + 2] = (imageTerm[src[p + 2]] + colourTerm[c + 2]) | 0;
    }
  }
  return out;
}

/** The overlay as a PNG at the original image size. */
export async function renderOverlayPng(img: DecodedImage, map: MapGrid, g: Geometry, opts: OverlayOptions): Promise<Buffer> {
  const rgb = renderOverlayRgb(img, map, g, opts);
  return encodePng(rgb, img.width, img.height);
}

export interface BareMapOptions {
  /** Output size; default the map's own grid. Resampled bilinearly with half-pixel centres. */
  width?: number;
  height?: number;
}

/** A bare coloured map (no image) as PNG. */
export async function renderMapPng(map: MapGrid, range: DisplayRange, colormap: ColormapName, opts: BareMapOptions = {}): Promise<Buffer> {
  const width = opts.width ?? map.width;
  const height = opts.height ?? map.height;
  const g: Geometry = {
    mode: 'stretch',
    original: { width, height },
    input: { width: map.width, height: map.height },
    source: { x: 0, y: 0, width, height },
    target: { x: 0, y: 0, width: map.width, height: map.height },
  };
  const values = width === map.width && height === map.height ? map.data : upsampleMapToOriginal(map, g);
  return encodePng(applyColormap(values, range.lo, range.hi, colormap), width, height);
}

/** Interleaved 8-bit RGB → PNG bytes. */
export function encodePng(rgb: Uint8Array, width: number, height: number): Promise<Buffer> {
  return sharp(rgb, { raw: { width, height, channels: 3 } }).png().toBuffer();
}
