/**
 * Turning a decoded image into the model's input tensor, and remembering the geometry so that
 * maps at model-input resolution can be drawn back onto the original image at its original size.
 */
import { UserError } from '../errors';
import type { DecodedImage } from './decode';
import { cropRgb, resizeRgb, type ResampleFilter } from './resample';

export type ResizeMode = 'stretch' | 'crop' | 'letterbox';
/** 'GRAY' feeds one channel of luma 0.299 R + 0.587 G + 0.114 B (ITU-R BT.601), rounded to 8 bits as Pillow's convert('L'). */
export type ChannelOrder = 'RGB' | 'BGR' | 'GRAY';
export type TensorLayout = 'NCHW' | 'NHWC';

export interface PreprocessSpec {
  /** Model input size [height, width]. */
  size: [number, number];
  /**
   * stretch: resize to size, ignoring aspect ratio.
   * crop: scale so the shorter side fits, centre-crop the rest (the crop is taken in the original
   *   image, then resized, so the kept pixels are exactly those of the crop).
   * letterbox: scale to fit inside, pad the rest with `background`, content centred.
   */
  resize: ResizeMode;
  channels: ChannelOrder;
  layout: TensorLayout;
  /** value = ((pixel · scale) − mean[c]) / std[c], pixel the 8-bit resized value. */
  scale: number;
  /** Per channel, listed in the tensor's channel order (for BGR, mean[0] is blue). One value for GRAY. */
  mean: number[];
  std: number[];
  /** Letterbox padding colour as 8-bit R,G,B (default DEFAULT_PAD). */
  background?: [number, number, number];
  /** Resampling filter (default 'bilinear', see resample.ts). */
  resample?: ResampleFilter;
}

/**
 * Mid-grey: after mean subtraction it is close to zero for every common convention, so the
 * padding carries little signal. A rule of thumb, no source.
 */
export const DEFAULT_PAD: [number, number, number] = [128, 128, 128];
/** Used when the model's input height/width are dynamic; the most common classifier input size (common practice, no source). */
export const DEFAULT_DYNAMIC_SIZE = 224;

/** Axis-aligned rectangle in continuous pixel coordinates: pixel (i, j) covers [i, i+1) × [j, j+1). */
export interface Rect {
  x: number;
  y: number;
  width: number;
  height: number;
}

/**
 * How model-input pixels relate to original-image pixels. The rectangle `source` of the original
 * image is scaled onto the rectangle `target` of the model input (continuous coordinates):
 *   inputX = target.x + (origX − source.x) · target.width / source.width, likewise for y.
 * stretch: source = whole image, target = whole input. crop: source = the centred crop, target =
 * whole input. letterbox: source = whole image, target = the centred content box (the rest is padding).
 */
export interface Geometry {
  mode: ResizeMode;
  original: { width: number; height: number };
  input: { width: number; height: number };
  source: Rect;
  target: Rect;
}

export interface PreprocessedInput {
  data: Float32Array;
  dims: number[];
  geometry: Geometry;
}

export type PresetName = 'unit' | 'standardized' | 'symmetric' | 'raw255' | 'bgr-mean';

export type ValueConvention = Pick<PreprocessSpec, 'channels' | 'scale' | 'mean' | 'std'>;

/** The common value conventions; each sets channels, scale, mean and std (not size, layout or resize). */
export const PREPROCESS_PRESETS: Record<PresetName, ValueConvention> = {
  /** 0..1 RGB. */
  unit: { channels: 'RGB', scale: 1 / 255, mean: [0, 0, 0], std: [1, 1, 1] },
  /**
   * 0..1 RGB standardised by the per-channel mean and standard deviation of a large collection of
   * natural photographs; the convention of most pretrained classifiers. Values from memory.
   */
  standardized: { channels: 'RGB', scale: 1 / 255, mean: [0.485, 0.456, 0.406], std: [0.229, 0.224, 0.225] },
  /** −1..1 RGB: pixel/127.5 − 1. */
  symmetric: { channels: 'RGB', scale: 1 / 127.5, mean: [1, 1, 1], std: [1, 1, 1] },
  /** 0..255 RGB, unchanged. */
  raw255: { channels: 'RGB', scale: 1, mean: [0, 0, 0], std: [1, 1, 1] },
  /**
   * 0..255 BGR minus a per-channel mean (B, G, R), the convention of older classifier
   * frameworks that read images with BGR order. Values from memory.
   */
  'bgr-mean': { channels: 'BGR', scale: 1, mean: [103.939, 116.779, 123.68], std: [1, 1, 1] },
};

export const PRESET_NAMES = Object.keys(PREPROCESS_PRESETS) as PresetName[];

/** Number of tensor channels a channel order produces. */
export function channelCount(order: ChannelOrder): number {
  return order === 'GRAY' ? 1 : 3;
}

/**
 * A spec from the model's input shape: [1,C,H,W] → NCHW, [1,H,W,C] → NHWC (C = 3, or 1 for GRAY);
 * dynamic H/W (strings, −1, 0) → DEFAULT_DYNAMIC_SIZE. When both positions could be channels
 * (e.g. [1,3,3,3]) NCHW is assumed. Values default to the `unit` preset and resize to 'stretch'.
 */
export function specFromInputShape(dims: readonly (number | string | null | undefined)[], where = 'the model input'): PreprocessSpec {
  const shapeText = `[${dims.map((d) => (typeof d === 'number' ? d : d ?? '?')).join(', ')}]`;
  if (dims.length !== 4) {
    throw new UserError(`${where} has shape ${shapeText}; Factfoil explains image inputs shaped [1,3,H,W] or [1,H,W,3]`, 'export the model with a 4-D image input');
  }
  const fixed = (d: number | string | null | undefined): number | undefined => (typeof d === 'number' && d > 0 ? d : undefined);
  const isChannels = (d: number | string | null | undefined) => fixed(d) === 3 || fixed(d) === 1;
  let layout: TensorLayout;
  if (isChannels(dims[1])) layout = 'NCHW';
  else if (isChannels(dims[3])) layout = 'NHWC';
  else {
    throw new UserError(`${where} has shape ${shapeText}: no axis of size 3 (or 1) for colour channels`, 'set the layout in the model settings sidecar');
  }
  const c = layout === 'NCHW' ? fixed(dims[1])! : fixed(dims[3])!;
  const [hd, wd] = layout === 'NCHW' ? [dims[2], dims[3]] : [dims[1], dims[2]];
  const base = c === 1
    ? { channels: 'GRAY' as const, scale: 1 / 255, mean: [0], std: [1] }
    : { ...PREPROCESS_PRESETS.unit, mean: [...PREPROCESS_PRESETS.unit.mean], std: [...PREPROCESS_PRESETS.unit.std] };
  return {
    size: [fixed(hd) ?? DEFAULT_DYNAMIC_SIZE, fixed(wd) ?? DEFAULT_DYNAMIC_SIZE],
    resize: 'stretch',
    layout,
    ...base,
  };
}

/** Geometry of a resize mode, without touching pixels. */
export function computeGeometry(width: number, height: number, size: [number, number], mode: ResizeMode): Geometry {
  const [h, w] = size;
  const whole = (ww: number, hh: number): Rect => ({ x: 0, y: 0, width: ww, height: hh });
  const base = { mode, original: { width, height }, input: { width: w, height: h } };
  if (mode === 'stretch') return { ...base, source: whole(width, height), target: whole(w, h) };
  if (mode === 'crop') {
    // Shorter side to size: scale = max(w/W, h/H); the crop is the part of the original that
    // lands inside the input, rounded to whole pixels and centred (floor on odd leftovers).
    const s = Math.max(w / width, h / height);
    const cw = Math.min(width, Math.max(1, Math.round(w / s)));
    const ch = Math.min(height, Math.max(1, Math.round(h / s)));
    const source = { x: Math.floor((width - cw) / 2), y: Math.floor((height - ch) / 2), width: cw, height: ch };
    return { ...base, source, target: whole(w, h) };
  }
  const s = Math.min(w / width, h / height);
  const rw = Math.min(w, Math.max(1, Math.round(width * s)));
  const rh = Math.min(h, Math.max(1, Math.round(height * s)));
  const target = { x: Math.floor((w - rw) / 2), y: Math.floor((h - rh) / 2), width: rw, height: rh };
  return { ...base, source: whole(width, height), target };
}

/** Maps a point from original-image coordinates to model-input coordinates (continuous). */
export function originalToInput(g: Geometry, x: number, y: number): [number, number] {
  return [
    g.target.x + ((x - g.source.x) * g.target.width) / g.source.width,
    g.target.y + ((y - g.source.y) * g.target.height) / g.source.height,
  ];
}

/** Maps a point from model-input coordinates to original-image coordinates (continuous). */
export function inputToOriginal(g: Geometry, x: number, y: number): [number, number] {
  return [
    g.source.x + ((x - g.target.x) * g.source.width) / g.target.width,
    g.source.y + ((y - g.target.y) * g.source.height) / g.target.height,
  ];
}

/** Checks a spec's fields; `where` names the file or setting in the error. */
export function validatePreprocessSpec(spec: PreprocessSpec, where: string): void {
  const fail = (field: string, why: string) => new UserError(`${where}: preprocess.${field} ${why}`, 'fix the model settings');
  const [h, w] = Array.isArray(spec.size) ? spec.size : [NaN, NaN];
  if (!Array.isArray(spec.size) || spec.size.length !== 2 || ![h, w].every((d) => Number.isInteger(d) && d >= 1 && d <= 16384)) {
    throw fail('size', 'must be [height, width] with whole numbers from 1 to 16384');
  }
  if (!['stretch', 'crop', 'letterbox'].includes(spec.resize)) throw fail('resize', "must be 'stretch', 'crop' or 'letterbox'");
  if (!['RGB', 'BGR', 'GRAY'].includes(spec.channels)) throw fail('channels', "must be 'RGB', 'BGR' or 'GRAY'");
  if (!['NCHW', 'NHWC'].includes(spec.layout)) throw fail('layout', "must be 'NCHW' or 'NHWC'");
  if (typeof spec.scale !== 'number' || !Number.isFinite(spec.scale) || spec.scale === 0) throw fail('scale', 'must be a non-zero number');
  const n = channelCount(spec.channels);
  const okLen = (a: unknown) => Array.isArray(a) && (a.length === n || (n === 1 && a.length === 3));
  if (!okLen(spec.mean) || !spec.mean.every((v) => typeof v === 'number' && Number.isFinite(v))) {
    throw fail('mean', `must be ${n} number${n > 1 ? 's' : ''}`);
  }
  if (!okLen(spec.std) || !spec.std.every((v) => typeof v === 'number' && Number.isFinite(v) && v !== 0)) {
    throw fail('std', `must be ${n} non-zero number${n > 1 ? 's' : ''}`);
  }
  if (spec.background !== undefined && !(Array.isArray(spec.background) && spec.background.length === 3 && spec.background.every((v) => Number.isInteger(v) && v >= 0 && v <= 255))) {
    throw fail('background', 'must be three whole numbers 0..255');
  }
  if (spec.resample !== undefined && !['bilinear', 'nearest'].includes(spec.resample)) throw fail('resample', "must be 'bilinear' or 'nearest'");
}

/**
 * Resizes per spec.resize with the resampler of resample.ts, then writes
 * ((pixel · scale) − mean[c]) / std[c] into a float32 tensor of dims [1,C,H,W] or [1,H,W,C].
 */
export function preprocessImage(img: DecodedImage, spec: PreprocessSpec): PreprocessedInput {
  validatePreprocessSpec(spec, 'preprocessing');
  const [h, w] = spec.size;
  const geometry = computeGeometry(img.width, img.height, spec.size, spec.resize);
  const filter = spec.resample ?? 'bilinear';
  const { source: s, target: t } = geometry;
  let content = img.rgb;
  if (spec.resize === 'crop') content = cropRgb(content, img.width, s.x, s.y, s.width, s.height);
  content = resizeRgb(content, s.width, s.height, t.width, t.height, filter);

  const nc = channelCount(spec.channels);
  // One lookup table per channel holds the formula's value for each 8-bit level, computed in
  // double precision exactly as written above and rounded once to float32.
  const luts = Array.from({ length: nc }, (_, c) => {
    const lut = new Float32Array(256);
    for (let v = 0; v < 256; v++) lut[v] = (v * spec.scale - spec.mean[c]) / spec.std[c];
    return lut;
  });
  const pad = spec.background ?? DEFAULT_PAD;
  const data = new Float32Array(nc * h * w);
  const planar = spec.layout === 'NCHW';
  const plane = h * w;
  const bgr = spec.channels === 'BGR';
  const [l0, l1, l2] = nc === 3 ? luts : [luts[0], luts[0], luts[0]];
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const inside = x >= t.x && x < t.x + t.width && y >= t.y && y < t.y + t.height;
      const p = inside ? ((y - t.y) * t.width + (x - t.x)) * 3 : -1;
      const r = inside ? content[p] : pad[0];
      const g = inside ? content[p + 1] : pad[1];
      const b = inside ? content[p + 2] : pad[2];
      const pixel = y * w + x;
      if (nc === 1) {
        // Pillow's convert('L') fixed-point luma, 0.299/0.587/0.114 in 16.16 with rounding
        // (recalled from Pillow's Convert.c; matches Pillow 9.4 on 90 000 random colours).
        data[pixel] = l0[(r * 19595 + g * 38470 + b * 7471 + 0x8000) >> 16];
        continue;
      }
      const first = bgr ? b : r;
      const third = bgr ? r : b;
      if (planar) {
        data[pixel] = l0[first];
        data[plane + pixel] = l1[g];
        data[2 * plane + pixel] = l2[third];
      } else {
        data[pixel * 3] = l0[first];
        data[pixel * 3 + 1] = l1[g];
        data[pixel * 3 + 2] = l2[third];
      }
    }
  }
  const dims = planar ? [1, nc, h, w] : [1, h, w, nc];
  return { data, dims, geometry };
}
