/**
 * Scoring a map against the true object or defect region (a mask or a box): NSS, CC, AUC-Judd
 * and SIM (Bylinskii et al., TPAMI 2018 — recalled), the share of the map's energy inside the
 * region, and the pointing game (Zhang et al., ECCV 2016). The map is brought to the region's
 * resolution (the original image) through the preprocessing geometry, so crops and letterboxes
 * land where the user drew the region; pixels the model never saw (outside a crop) are left out.
 */
import { decodeImage } from '../image/decode';
import { Geometry } from '../image/preprocess';
import { upsampleMapToOriginal } from '../image/overlay';
import { UserError } from '../errors';
import { aucJudd, boxToMask, cc, energyInMask, nss, pointingHit, sim } from '../metrics';
import { TruthReport, TrustMapKind } from './report';
import { finiteOrNull } from './subject';

/** A 0/1 region at the original image's size (or the model input's, for tensor inputs). */
export interface Region {
  mask: Uint8Array;
  width: number;
  height: number;
  source: 'mask' | 'box';
}

/** A box in image pixels: left, top, width, height. */
export interface Box { x: number; y: number; width: number; height: number }

/** Pointing-game tolerance: 15 px as Zhang et al. introduced it (from memory). */
export const DEFAULT_POINTING_TOLERANCE = 15;

/** A mask image: any pixel whose brightest channel is above half (≥ 128) is inside. */
export async function readMask(file: string, width: number, height: number): Promise<Region> {
  const img = await decodeImage(file);
  if (img.width !== width || img.height !== height) {
    throw new UserError(`mask ${file} is ${img.width}×${img.height} but the image is ${width}×${height}`, 'draw the mask at the size of the image it belongs to');
  }
  const mask = new Uint8Array(width * height);
  let inside = 0;
  for (let i = 0; i < mask.length; i++) {
    const v = Math.max(img.rgb[3 * i], img.rgb[3 * i + 1], img.rgb[3 * i + 2]);
    inside += mask[i] = v >= 128 ? 1 : 0;
  }
  if (inside === 0) throw new UserError(`mask ${file} marks no pixel (all dark)`, 'white (or any bright colour) marks the region, black the rest');
  if (inside === mask.length) throw new UserError(`mask ${file} marks every pixel`, 'a region covering the whole image cannot be scored against');
  return { mask, width, height, source: 'mask' };
}

export function boxRegion(b: Box, width: number, height: number): Region {
  return { mask: boxToMask(b.x, b.y, b.width, b.height, width, height), width, height, source: 'box' };
}

/** `x,y,w,h` (image pixels) → a box, refusing anything else. */
export function parseBox(text: string): Box {
  const parts = text.split(',').map((t) => Number(t.trim()));
  if (parts.length !== 4 || !parts.every(Number.isFinite) || parts[2] <= 0 || parts[3] <= 0) {
    throw new UserError(`--box must be x,y,w,h in image pixels with a positive width and height, not '${text}'`);
  }
  return { x: parts[0], y: parts[1], width: parts[2], height: parts[3] };
}

/**
 * Each map (at model-input resolution) scored against the region. `geometry` maps input pixels
 * to image pixels; without it the region must be at input resolution.
 */
export function truthScores(
  maps: Map<TrustMapKind, Float32Array>, input: { width: number; height: number }, region: Region,
  geometry: Geometry | undefined, tolerancePx = DEFAULT_POINTING_TOLERANCE,
): TruthReport {
  const W = region.width;
  const H = region.height;
  if (!geometry && (W !== input.width || H !== input.height)) {
    throw new UserError(`the region is ${W}×${H} but the model input is ${input.width}×${input.height}`, 'for a tensor input give the mask or box at input resolution');
  }
  if (geometry && (geometry.original.width !== W || geometry.original.height !== H)) {
    throw new UserError(`the region is ${W}×${H} but the image is ${geometry.original.width}×${geometry.original.height}`);
  }
  let inside = 0;
  for (let i = 0; i < region.mask.length; i++) inside += region.mask[i];
  const out: TruthReport['maps'] = {};
  for (const [k, m] of maps) {
    const full = geometry ? upsampleMapToOriginal({ data: m, ...input }, geometry) : m;
    const seen: number[] = [];
    for (let i = 0; i < full.length; i++) if (Number.isFinite(full[i])) seen.push(i);
    const map = Float64Array.from(seen, (i) => full[i]);
    const mask = Uint8Array.from(seen, (i) => region.mask[i]);
    const inSeen = mask.reduce((a, b) => a + b, 0);
    const scorable = inSeen > 0 && inSeen < mask.length;
    const pointable = Float64Array.from(full, (v) => (Number.isFinite(v) ? v : -Infinity));
    out[k] = {
      nss: scorable ? finiteOrNull(nss(map, mask)) : null,
      cc: scorable ? finiteOrNull(cc(map, mask)) : null,
      auc_judd: scorable ? finiteOrNull(aucJudd(map, mask)) : null,
      sim: scorable ? finiteOrNull(sim(map, mask)) : null,
      energy_in_mask: scorable ? finiteOrNull(energyInMask(map, mask)) : null,
      pointing_hit: inSeen > 0 && pointingHit(pointable, region.mask, W, H, tolerancePx),
    };
  }
  return { source: region.source, mask_fraction: inside / region.mask.length, pointing_tolerance_px: tolerancePx, maps: out };
}
