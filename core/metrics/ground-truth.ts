import { UserError } from '../errors';
import { NumericArray, countMask, minMax, requireDims, requireMaskNonEmpty, requireSameLength, requireSize } from './checks';
import { pearson } from './correlation';

// Scores of a map against the user's mask of the object or defect. Definitions follow Bylinskii,
// Judd, Oliva, Torralba & Durand, "What do different evaluation metrics tell us about saliency
// models?", TPAMI 2018 — recalled from memory, not re-read; the mask plays the role of the
// fixation map (or, for CC and SIM, of the fixation density).

/**
 * Normalized scanpath saliency: the map is z-scored over the whole image (mean 0, standard
 * deviation 1, the sample (n−1) deviation of the MATLAB `std` the benchmark code used, from
 * memory) and averaged over the mask pixels. 0 means the mask is no more salient than average;
 * NaN for a constant map.
 */
export function nss(map: NumericArray, mask: NumericArray): number {
  requireSameLength(map, mask, 'nss');
  requireMaskNonEmpty(mask, 'nss');
  const n = map.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += map[i];
  mean /= n;
  let ss = 0;
  for (let i = 0; i < n; i++) ss += (map[i] - mean) ** 2;
  const sd = Math.sqrt(ss / (n - 1));
  if (!(sd > 0)) return NaN;
  let total = 0;
  let count = 0;
  for (let i = 0; i < n; i++) {
    if (mask[i] === 1) {
      total += (map[i] - mean) / sd;
      count++;
    }
  }
  return total / count;
}

/** Correlation coefficient: Pearson's r between the map and the mask (0/1) or a density of the same size. */
export function cc(map: NumericArray, maskOrDensity: NumericArray): number {
  requireSameLength(map, maskOrDensity, 'cc');
  return pearson(map, maskOrDensity);
}

/**
 * AUC-Judd: the ROC area of the map as a detector of mask pixels. Thresholds sit at the map values
 * found at mask pixels; at each, the true-positive rate is the share of mask pixels at or above it
 * and the false-positive rate the share of the other pixels at or above it; the curve runs from
 * (0,0) to (1,1) and its area is taken by the trapezoid rule. Ties between a mask pixel and an
 * outside pixel count one half — the expected value of the tiny random jitter the original code
 * adds to break them (from memory) — which makes the area equal the Mann–Whitney probability
 * P(map at a mask pixel > map at an outside pixel) + ½·P(equal), without randomness.
 */
export function aucJudd(map: NumericArray, mask: NumericArray): number {
  requireSameLength(map, mask, 'aucJudd');
  const inside = requireMaskNonEmpty(mask, 'aucJudd', true);
  const outside = mask.length - inside;
  const n = map.length;
  const order = new Uint32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  order.sort((i, j) => map[j] - map[i]);

  // Walk groups of equal map value from the top. A group holding mask pixels is a threshold: the
  // point just above it (outside pixels of higher groups counted) and the point at it; a group
  // with no mask pixel only moves the false-positive rate, which the next threshold picks up.
  let area = 0;
  let tp = 0; // mask pixels at or above the current value
  let fp = 0; // outside pixels at or above the current value
  let lastX = 0;
  let lastY = 0;
  let start = 0;
  while (start < n) {
    let end = start;
    let groupIn = 0;
    while (end < n && map[order[end]] === map[order[start]]) {
      if (mask[order[end]] === 1) groupIn++;
      end++;
    }
    const groupOut = end - start - groupIn;
    if (groupIn > 0) {
      const aboveX = fp / outside; // just above this threshold: tp unchanged since the last point
      area += (aboveX - lastX) * lastY;
      tp += groupIn;
      fp += groupOut;
      const x = fp / outside;
      const y = tp / inside;
      area += ((x - aboveX) * (y + lastY)) / 2;
      lastX = x;
      lastY = y;
    } else {
      fp += groupOut;
    }
    start = end;
  }
  area += (1 - lastX) * (lastY + 1) / 2; // last threshold to (1,1); lastY is 1 here
  return area;
}

/**
 * Similarity (histogram intersection): Σ min(P, Q) of the map and the mask, each made a
 * distribution summing to 1 — the map after scaling to [0,1] by its min and max, as the benchmark
 * code did (from memory). 1 means identical distributions, 0 disjoint ones. A constant map has
 * no shape and is taken as uniform (this project's choice).
 */
export function sim(map: NumericArray, mask: NumericArray): number {
  requireSameLength(map, mask, 'sim');
  const inside = requireMaskNonEmpty(mask, 'sim');
  const n = map.length;
  const { min, max } = minMax(map);
  const p = new Float64Array(n);
  if (max > min) for (let i = 0; i < n; i++) p[i] = (map[i] - min) / (max - min);
  else p.fill(1);
  let sum = 0;
  for (let i = 0; i < n; i++) sum += p[i];
  let total = 0;
  for (let i = 0; i < n; i++) total += Math.min(p[i] / sum, mask[i] / inside);
  return total;
}

/**
 * The share of the map's positive mass that lies inside the mask: Σ_mask max(m,0) / Σ max(m,0)
 * (this project's reading of "energy inside the mask"; negative values are evidence against and
 * are left out). NaN when the map has no positive value.
 */
export function energyInMask(map: NumericArray, mask: NumericArray): number {
  requireSameLength(map, mask, 'energyInMask');
  requireMaskNonEmpty(mask, 'energyInMask');
  let all = 0;
  let inside = 0;
  for (let i = 0; i < map.length; i++) {
    const v = map[i] > 0 ? map[i] : 0;
    all += v;
    if (mask[i] === 1) inside += v;
  }
  return all > 0 ? inside / all : NaN;
}

/**
 * Pointing game: does the map's maximum fall on the object? The arg-max (the first in row-major
 * order when several pixels tie) is a hit when some mask pixel centre lies within `tolerancePx`
 * (Euclidean) of it. Zhang et al., ECCV 2016 introduced the game with a 15 px tolerance (from
 * memory); 0 asks for the maximum to be on a mask pixel itself.
 */
export function pointingHit(map: NumericArray, mask: NumericArray, w: number, h: number, tolerancePx: number): boolean {
  requireSize(map, w, h, 'pointingHit');
  requireSameLength(map, mask, 'pointingHit');
  requireMaskNonEmpty(mask, 'pointingHit');
  if (!(tolerancePx >= 0)) throw new UserError(`pointingHit: tolerance must be 0 or more pixels, got ${tolerancePx}`);
  let best = 0;
  for (let i = 1; i < map.length; i++) if (map[i] > map[best]) best = i;
  const px = best % w;
  const py = (best - px) / w;
  const r = Math.floor(tolerancePx);
  const r2 = tolerancePx * tolerancePx;
  for (let y = Math.max(py - r, 0); y <= Math.min(py + r, h - 1); y++) {
    for (let x = Math.max(px - r, 0); x <= Math.min(px + r, w - 1); x++) {
      if (mask[y * w + x] === 1 && (x - px) ** 2 + (y - py) ** 2 <= r2) return true;
    }
  }
  return false;
}

/**
 * A W×H 0/1 mask of an axis-aligned box with top-left corner (x, y) and size w×h in pixels: a
 * pixel is inside when its centre (col + ½, row + ½) lies in [x, x+w) × [y, y+h). The box may
 * reach past the image; a box that covers no pixel centre is refused.
 */
export function boxToMask(x: number, y: number, w: number, h: number, W: number, H: number): Uint8Array {
  requireDims(W, H, 'boxToMask');
  if (![x, y, w, h].every(Number.isFinite) || w <= 0 || h <= 0) {
    throw new UserError(`the object box (x ${x}, y ${y}, width ${w}, height ${h}) needs numbers and a positive width and height`);
  }
  const mask = new Uint8Array(W * H);
  // Column c is inside when x ≤ c + ½ < x + w, i.e. c ∈ [ceil(x − ½), ceil(x + w − ½) − 1].
  const c0 = Math.max(Math.ceil(x - 0.5), 0);
  const c1 = Math.min(Math.ceil(x + w - 0.5) - 1, W - 1);
  const r0 = Math.max(Math.ceil(y - 0.5), 0);
  const r1 = Math.min(Math.ceil(y + h - 0.5) - 1, H - 1);
  for (let r = r0; r <= r1; r++) mask.fill(1, r * W + c0, r * W + c1 + 1);
  if (countMask(mask, 'boxToMask') === 0) {
    throw new UserError(`the object box (x ${x}, y ${y}, width ${w}, height ${h}) covers no pixel of the ${W}×${H} image`, 'give x, y, width and height in image pixels, with the box inside the image');
  }
  return mask;
}
