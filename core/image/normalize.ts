/**
 * Display normalization (DESIGN §4): maps are stored raw; for display they are clipped to a
 * range chosen here, by default [0, p99.5].
 */
import { UserError } from '../errors';

export type DisplayRangeMode =
  | { kind: 'percentile'; p: number }
  | { kind: 'max' }
  | { kind: 'fixed'; lo: number; hi: number }
  /** For signed maps on the diverging colormap: [−q, q] with q the p-th percentile of |v|. */
  | { kind: 'symmetric'; p: number };

export interface DisplayRange {
  lo: number;
  hi: number;
}

/** DESIGN §4 default: clip to [0, p99.5]. */
export const DEFAULT_DISPLAY_RANGE: DisplayRangeMode = { kind: 'percentile', p: 99.5 };

/**
 * Percentile of finite values with linear interpolation between closest ranks: sorted values
 * x_0 ≤ … ≤ x_{n−1}, position h = (p/100)·(n − 1), result x_⌊h⌋ + (h − ⌊h⌋)(x_⌊h⌋+1 − x_⌊h⌋).
 * This is NumPy's default method ('linear', Hyndman & Fan type 7). NaN and ±∞ are ignored; an
 * array with no finite value gives 0.
 */
export function percentile(values: ArrayLike<number> | readonly ArrayLike<number>[], p: number): number {
  if (!(p >= 0 && p <= 100)) throw new UserError(`percentile ${p} is outside 0..100`, 'use a value such as 99.5');
  const sorted = finiteSorted(values, false);
  return percentileOfSorted(sorted, p);
}

function percentileOfSorted(sorted: Float64Array, p: number): number {
  const n = sorted.length;
  if (n === 0) return 0;
  const h = (p / 100) * (n - 1);
  const i = Math.floor(h);
  if (i >= n - 1) return sorted[n - 1];
  return sorted[i] + (h - i) * (sorted[i + 1] - sorted[i]);
}

function isGroup(values: ArrayLike<number> | readonly ArrayLike<number>[]): values is readonly ArrayLike<number>[] {
  return values.length > 0 && typeof (values as ArrayLike<unknown>)[0] === 'object';
}

function finiteSorted(values: ArrayLike<number> | readonly ArrayLike<number>[], absolute: boolean): Float64Array {
  const arrays = isGroup(values) ? values : [values as ArrayLike<number>];
  let n = 0;
  for (const a of arrays) n += a.length;
  const out = new Float64Array(n);
  let k = 0;
  for (const a of arrays) {
    for (let i = 0; i < a.length; i++) {
      const v = a[i];
      if (Number.isFinite(v)) out[k++] = absolute ? Math.abs(v) : v;
    }
  }
  return out.subarray(0, k).sort();
}

function finiteMax(arrays: readonly ArrayLike<number>[]): number {
  let m = -Infinity;
  for (const a of arrays) for (let i = 0; i < a.length; i++) if (Number.isFinite(a[i]) && a[i] > m) m = a[i];
  return m === -Infinity ? 0 : m;
}

/**
 * The display range of one map, or one range shared by several (pass an array of maps: the
 * statistic is taken over all their values together, so pinned maps compare on one scale).
 * percentile: [0, p-th percentile]; max: [0, max]; symmetric: [−q, q], q the p-th percentile of
 * |v|; fixed: as given. lo is 0 for the sequential modes because the maps are ReLU'd or absolute
 * values (DESIGN §4) and zero means "no evidence"; a hi ≤ 0 gives the flat range {0, 0}.
 */
export function displayRange(values: ArrayLike<number> | readonly ArrayLike<number>[], mode: DisplayRangeMode = DEFAULT_DISPLAY_RANGE): DisplayRange {
  const arrays = isGroup(values) ? values : [values as ArrayLike<number>];
  switch (mode.kind) {
    case 'fixed':
      if (!(Number.isFinite(mode.lo) && Number.isFinite(mode.hi) && mode.hi > mode.lo)) {
        throw new UserError(`display range [${mode.lo}, ${mode.hi}] is not a valid range`, 'give lo < hi');
      }
      return { lo: mode.lo, hi: mode.hi };
    case 'max':
      return { lo: 0, hi: Math.max(0, finiteMax(arrays)) };
    case 'percentile': {
      const hi = percentile(arrays, mode.p);
      return { lo: 0, hi: Math.max(0, hi) };
    }
    case 'symmetric': {
      if (!(mode.p >= 0 && mode.p <= 100)) throw new UserError(`percentile ${mode.p} is outside 0..100`, 'use a value such as 99.5');
      const q = percentileOfSorted(finiteSorted(arrays, true), mode.p);
      return { lo: -q, hi: q };
    }
  }
}

/** One range over a comparison group of maps (DESIGN §4 "one scale shared by a comparison group"). */
export function sharedDisplayRange(maps: readonly ArrayLike<number>[], mode: DisplayRangeMode = DEFAULT_DISPLAY_RANGE): DisplayRange {
  if (maps.length === 0) return { lo: 0, hi: 0 };
  return displayRange(maps, mode);
}
