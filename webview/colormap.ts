/**
 * Colormap tables for the panel: 256 RGB entries each, as a flat Uint8Array of 768 bytes.
 * Built by linear interpolation (in sRGB) between evenly spaced stops. The viridis and inferno
 * stops are ten samples of the published CC0 tables, written from memory, so they approximate
 * the tables between stops; the diverging map is this project's own (blue → near-white → red).
 * When core/image/colormap.ts ships exact tables, the panel can take them from there instead.
 */
import type { ColormapName } from './protocol';

const STOPS: Record<ColormapName, readonly string[]> = {
  viridis: ['#440154', '#482878', '#3e4989', '#31688e', '#26828e', '#1f9e89', '#35b779', '#6ece58', '#b5de2b', '#fde725'],
  inferno: ['#000004', '#1b0c41', '#4a0c6b', '#781c6d', '#a52c60', '#cf4446', '#ed6925', '#fb9b06', '#f7d13d', '#fcffa4'],
  diverging: ['#2c4a9a', '#4f78c4', '#8fb0e0', '#c9d8ee', '#f2efec', '#f2c9b5', '#e08b6c', '#c24a3a', '#8e1b24'],
};

/** Maps that are read as signed around zero: the display range is made symmetric. */
export function isDiverging(name: ColormapName): boolean {
  return name === 'diverging';
}

function hexToRgb(hex: string): [number, number, number] {
  const n = parseInt(hex.slice(1), 16);
  return [(n >> 16) & 255, (n >> 8) & 255, n & 255];
}

const cache = new Map<ColormapName, Uint8Array>();

export function colormapTable(name: ColormapName): Uint8Array {
  const hit = cache.get(name);
  if (hit) return hit;
  const stops = STOPS[name].map(hexToRgb);
  const table = new Uint8Array(256 * 3);
  for (let i = 0; i < 256; i++) {
    const t = (i / 255) * (stops.length - 1);
    const j = Math.min(Math.floor(t), stops.length - 2);
    const f = t - j;
    for (let c = 0; c < 3; c++) table[i * 3 + c] = Math.round(stops[j][c] * (1 - f) + stops[j + 1][c] * f);
  }
  cache.set(name, table);
  return table;
}

/** CSS linear-gradient stops for a legend bar, left = low. */
export function colormapCssGradient(name: ColormapName): string {
  return `linear-gradient(to right, ${STOPS[name].join(', ')})`;
}
