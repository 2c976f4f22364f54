/**
 * Colormaps: 256-entry 8-bit RGB lookup tables and their application to map values.
 */
import sharp from 'sharp';
import { INFERNO_TABLE, VIRIDIS_TABLE } from './colormap-tables';

export type ColormapName = 'viridis' | 'inferno' | 'diverging';
export const COLORMAP_NAMES: readonly ColormapName[] = ['viridis', 'inferno', 'diverging'];

/** Sequential maps start dark at lo; the diverging one is white at the middle of [lo, hi]. */
export function isDiverging(name: ColormapName): boolean {
  return name === 'diverging';
}

/** Published [0,1] triplets → 8-bit, rounding to nearest. */
function toBytes(table: readonly number[]): Uint8Array {
  const out = new Uint8Array(table.length);
  for (let i = 0; i < table.length; i++) out[i] = Math.round(table[i] * 255);
  return out;
}

/** CIELAB (D65) → 8-bit sRGB, with the sRGB matrix and transfer curve of IEC 61966-2-1. */
export function labToSrgb8(L: number, a: number, b: number): [number, number, number] {
  const fy = (L + 16) / 116;
  const fx = fy + a / 500;
  const fz = fy - b / 200;
  const d = 6 / 29;
  const finv = (f: number) => (f > d ? f * f * f : 3 * d * d * (f - 4 / 29));
  // D65 reference white (CIE 15)
  const X = 0.95047 * finv(fx);
  const Y = finv(fy);
  const Z = 1.08883 * finv(fz);
  const lin = [
    3.2404542 * X - 1.5371385 * Y - 0.4985314 * Z,
    -0.969266 * X + 1.8760108 * Y + 0.041556 * Z,
    0.0556434 * X - 0.2040259 * Y + 1.0572252 * Z,
  ];
  const enc = (c: number) => {
    const v = c <= 0.0031308 ? 12.92 * c : 1.055 * Math.pow(c, 1 / 2.4) - 0.055;
    return Math.max(0, Math.min(255, Math.round(v * 255)));
  };
  return [enc(lin[0]), enc(lin[1]), enc(lin[2])];
}

/**
 * This project's diverging map for signed values: straight lines in CIELAB from a blue end
 * Lab(38, 35, −70) through a near-white centre Lab(97, 0, 0) to a red end Lab(38, 58, 40).
 * Both halves have the same lightness ramp (97 → 38, linear in |t − ½|), so equal magnitudes of
 * either sign look equally strong; both lines stay inside the sRGB gamut (checked at 257 points
 * per half when the endpoints were chosen, and in the tests).
 */
export const DIVERGING_ENDS = { negative: [38, 35, -70], centre: [97, 0, 0], positive: [38, 58, 40] } as const;

function divergingTable(): Uint8Array {
  const out = new Uint8Array(256 * 3);
  const { negative, centre, positive } = DIVERGING_ENDS;
  for (let i = 0; i < 256; i++) {
    const u = (i / 255) * 2 - 1; // −1 .. 1
    const end = u < 0 ? negative : positive;
    const k = Math.abs(u);
    const rgb = labToSrgb8(
      centre[0] + (end[0] - centre[0]) * k,
      centre[1] + (end[1] - centre[1]) * k,
      centre[2] + (end[2] - centre[2]) * k,
    );
    out.set(rgb, i * 3);
  }
  return out;
}

const TABLES: Record<ColormapName, Uint8Array> = {
  viridis: toBytes(VIRIDIS_TABLE),
  inferno: toBytes(INFERNO_TABLE),
  diverging: divergingTable(),
};

/** The 256 × 3 byte table of a colormap. */
export function colormapTable(name: ColormapName): Uint8Array {
  const t = TABLES[name];
  if (!t) throw new Error(`unknown colormap '${name}'`);
  return t;
}

/**
 * Colours values: t = (v − lo)/(hi − lo) clipped to [0, 1], entry floor(t·256) capped at 255 (so
 * each of the 256 entries covers an equal slice of [lo, hi]). NaN takes entry 0. When hi ≤ lo
 * (a flat map) every value takes entry 0, or the centre for the diverging map.
 */
export function applyColormap(values: ArrayLike<number>, lo: number, hi: number, name: ColormapName): Uint8Array {
  const table = colormapTable(name);
  const index = colormapIndexer(lo, hi, name);
  const out = new Uint8Array(values.length * 3);
  for (let i = 0; i < values.length; i++) {
    const c = index(values[i]) * 3;
    out[i * 3] = table[c];
    out[i * 3 + 1] = table[c + 1];
    out[i * 3 + 2] = table[c + 2];
  }
  return out;
}

/** The table entry (0..255) applyColormap uses for a value, as a function of the value. */
export function colormapIndexer(lo: number, hi: number, name: ColormapName): (v: number) => number {
  const span = hi - lo;
  if (!(span > 0)) {
    const flat = isDiverging(name) ? 128 : 0;
    return () => flat;
  }
  const k = 256 / span;
  return (v: number) => {
    if (!(v > lo)) return 0; // also NaN
    const i = Math.floor((v - lo) * k);
    return i > 255 ? 255 : i;
  };
}

/** A horizontal legend strip, lo at the left and hi at the right, as PNG. */
export async function colormapLegendPng(name: ColormapName, width: number, height: number): Promise<Buffer> {
  const table = colormapTable(name);
  const rgb = new Uint8Array(width * height * 3);
  for (let x = 0; x < width; x++) {
    const idx = width === 1 ? 0 : Math.min(255, Math.floor((x / (width - 1)) * 256));
    for (let y = 0; y < height; y++) rgb.set(table.subarray(idx * 3, idx * 3 + 3), (y * width + x) * 3);
  }
  return sharp(rgb, { raw: { width, height, channels: 3 } }).png().toBuffer();
}
