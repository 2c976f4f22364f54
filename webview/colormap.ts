/**
 * Colormap tables for the panel: 256 RGB entries each, flat Uint8Array of 768 bytes, identical to
 * the ones core/image uses for saved PNGs (test/webview/colormap.test.ts checks every byte), so the
 * panel shows the colours the saved file will have.
 * viridis and inferno come from core/image/colormap-tables.ts (the published CC0 tables). The
 * diverging map is rebuilt here from the same CIELAB construction as core/image/colormap.ts,
 * because that module also imports sharp and cannot go into the browser bundle.
 */
import { INFERNO_TABLE, VIRIDIS_TABLE } from '../core/image/colormap-tables';
import type { ColormapName, DisplayRange } from './protocol';

/** Maps read as signed around zero: the display range is made symmetric. */
export function isDiverging(name: ColormapName): boolean {
  return name === 'diverging';
}

function toBytes(table: readonly number[]): Uint8Array {
  const out = new Uint8Array(table.length);
  for (let i = 0; i < table.length; i++) out[i] = Math.round(table[i] * 255);
  return out;
}

/** CIELAB (D65) → 8-bit sRGB: sRGB matrix and transfer curve of IEC 61966-2-1 (as in core/image). */
function labToSrgb8(L: number, a: number, b: number): [number, number, number] {
  const fy = (L + 16) / 116, fx = fy + a / 500, fz = fy - b / 200;
  const d = 6 / 29;
  const finv = (f: number) => (f > d ? f * f * f : 3 * d * d * (f - 4 / 29));
  const X = 0.95047 * finv(fx), Y = finv(fy), Z = 1.08883 * finv(fz);
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

/** Blue end, near-white centre, red end in CIELAB: the project's diverging map (core/image/colormap.ts). */
const DIVERGING_ENDS = { negative: [38, 35, -70], centre: [97, 0, 0], positive: [38, 58, 40] } as const;

function divergingTable(): Uint8Array {
  const out = new Uint8Array(256 * 3);
  const { negative, centre, positive } = DIVERGING_ENDS;
  for (let i = 0; i < 256; i++) {
    const u = (i / 255) * 2 - 1;
    const end = u < 0 ? negative : positive;
    const k = Math.abs(u);
    out.set(labToSrgb8(centre[0] + (end[0] - centre[0]) * k, centre[1] + (end[1] - centre[1]) * k, centre[2] + (end[2] - centre[2]) * k), i * 3);
  }
  return out;
}

const cache = new Map<ColormapName, Uint8Array>();

export function colormapTable(name: ColormapName): Uint8Array {
  let t = cache.get(name);
  if (!t) {
    t = name === 'viridis' ? toBytes(VIRIDIS_TABLE) : name === 'inferno' ? toBytes(INFERNO_TABLE) : divergingTable();
    cache.set(name, t);
  }
  return t;
}

/**
 * The table entry for a value, the same rule as core/image's colormapIndexer: t = (v − lo)/(hi − lo),
 * entry floor(t·256) capped at 255, NaN and v ≤ lo take 0; a flat range takes 0 (128 when diverging).
 */
export function colorIndexFor(range: DisplayRange, name: ColormapName): (v: number) => number {
  const span = range.hi - range.lo;
  if (!(span > 0)) { const flat = isDiverging(name) ? 128 : 0; return () => flat; }
  const k = 256 / span, lo = range.lo;
  return (v) => {
    if (!(v > lo)) return 0;
    const i = Math.floor((v - lo) * k);
    return i > 255 ? 255 : i;
  };
}

/** CSS linear-gradient for a legend bar (left = low), 17 stops sampled from the table. */
export function colormapCssGradient(name: ColormapName): string {
  const t = colormapTable(name);
  const stops: string[] = [];
  for (let s = 0; s <= 16; s++) {
    const i = Math.min(255, s * 16) * 3;
    stops.push(`rgb(${t[i]}, ${t[i + 1]}, ${t[i + 2]}) ${(s / 16) * 100}%`);
  }
  return `linear-gradient(to right, ${stops.join(', ')})`;
}
