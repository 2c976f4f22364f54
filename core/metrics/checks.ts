import { UserError } from '../errors';

/** Any array of numbers the metrics read: maps are Float32Array, masks Uint8Array, tests may pass plain arrays. */
export type NumericArray = ArrayLike<number>;

/** Two maps compared pixel by pixel must have the same number of pixels. */
export function requireSameLength(a: NumericArray, b: NumericArray, what: string): void {
  if (a.length !== b.length) {
    throw new UserError(
      `${what}: the two maps have ${a.length} and ${b.length} values`,
      'resize one to the other first (resizeBilinear)',
    );
  }
}

/** Width and height must be positive integers. */
export function requireDims(w: number, h: number, what: string): void {
  if (!Number.isInteger(w) || !Number.isInteger(h) || w < 1 || h < 1) {
    throw new UserError(`${what}: width and height must be positive integers, got ${w}×${h}`);
  }
}

/** A map said to be w×h must hold exactly w·h values. */
export function requireSize(a: NumericArray, w: number, h: number, what: string): void {
  requireDims(w, h, what);
  if (a.length !== w * h) {
    throw new UserError(`${what}: a ${w}×${h} map needs ${w * h} values, got ${a.length}`);
  }
}

/** Count the pixels a 0/1 mask marks, rejecting masks with other values. */
export function countMask(mask: NumericArray, what: string): number {
  let inside = 0;
  for (let i = 0; i < mask.length; i++) {
    const m = mask[i];
    if (m === 1) inside++;
    else if (m !== 0) throw new UserError(`${what}: the mask holds ${m} at pixel ${i}`, 'a mask must be 0 or 1 per pixel');
  }
  return inside;
}

/** A mask that is empty (or full) leaves a ground-truth score undefined: say so instead of returning NaN. */
export function requireMaskNonEmpty(mask: NumericArray, what: string, needOutside = false): number {
  const inside = countMask(mask, what);
  if (inside === 0) throw new UserError(`${what}: the mask marks no pixel`, 'draw the object or box again');
  if (needOutside && inside === mask.length) {
    throw new UserError(`${what}: the mask marks every pixel`, 'a mask covering the whole image cannot be scored against');
  }
  return inside;
}

/** Smallest and largest value, skipping NaN. */
export function minMax(a: NumericArray): { min: number; max: number } {
  let min = Infinity;
  let max = -Infinity;
  for (let i = 0; i < a.length; i++) {
    const v = a[i];
    if (v < min) min = v;
    if (v > max) max = v;
  }
  return { min, max };
}

/**
 * Scale a map to [0,1] by its own min and max. A constant map becomes all zeros (there is no
 * structure to scale); callers that need a distribution handle that case themselves.
 */
export function scaleToUnit(a: NumericArray): Float64Array {
  const { min, max } = minMax(a);
  const out = new Float64Array(a.length);
  const range = max - min;
  if (!(range > 0)) return out;
  for (let i = 0; i < a.length; i++) out[i] = (a[i] - min) / range;
  return out;
}
