/** Aggregate of one figure over a folder of images. */
export interface Summary {
  mean: number;
  /** Sample standard deviation (n − 1); NaN when fewer than two values. */
  sd: number;
  /** Values that entered the summary (finite ones). */
  n: number;
  min: number;
  max: number;
  /** Values left out because they were NaN or infinite (an undefined score on some image). */
  skipped: number;
}

/** Mean, sample standard deviation, count, min and max of the finite values; NaN fields when none. */
export function summarize(values: ArrayLike<number>): Summary {
  let n = 0;
  let sum = 0;
  let min = Infinity;
  let max = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (!Number.isFinite(v)) continue;
    n++;
    sum += v;
    if (v < min) min = v;
    if (v > max) max = v;
  }
  const skipped = values.length - n;
  if (n === 0) return { mean: NaN, sd: NaN, n, min: NaN, max: NaN, skipped };
  const mean = sum / n;
  let ss = 0;
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) ss += (values[i] - mean) ** 2;
  return { mean, sd: n > 1 ? Math.sqrt(ss / (n - 1)) : NaN, n, min, max, skipped };
}
