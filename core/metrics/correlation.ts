import { NumericArray, requireSameLength } from './checks';

/**
 * Pearson's product-moment correlation. NaN when either input is constant (the correlation is
 * undefined there, and a NaN is more honest than a 0 a reader might take for "unrelated").
 * Sums in float64 and centred first, so float32 maps of 10⁵ pixels lose no precision.
 */
export function pearson(a: NumericArray, b: NumericArray): number {
  requireSameLength(a, b, 'pearson');
  const n = a.length;
  if (n < 2) return NaN;
  let meanA = 0;
  let meanB = 0;
  for (let i = 0; i < n; i++) {
    meanA += a[i];
    meanB += b[i];
  }
  meanA /= n;
  meanB /= n;
  let sab = 0;
  let saa = 0;
  let sbb = 0;
  for (let i = 0; i < n; i++) {
    const da = a[i] - meanA;
    const db = b[i] - meanB;
    sab += da * db;
    saa += da * da;
    sbb += db * db;
  }
  if (saa === 0 || sbb === 0) return NaN;
  return sab / Math.sqrt(saa * sbb);
}

/**
 * Ranks 1..n with tied values given the average of the ranks they span (midranks), the
 * convention under which Spearman's ρ is Pearson's r of the ranks.
 */
export function averageRanks(a: NumericArray): Float64Array {
  const n = a.length;
  const order = new Uint32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  order.sort((i, j) => a[i] - a[j] || i - j);
  const ranks = new Float64Array(n);
  let start = 0;
  while (start < n) {
    let end = start;
    while (end + 1 < n && a[order[end + 1]] === a[order[start]]) end++;
    const rank = (start + end) / 2 + 1;
    for (let k = start; k <= end; k++) ranks[order[k]] = rank;
    start = end + 1;
  }
  return ranks;
}

/** Spearman's rank correlation: Pearson's r of the average ranks. NaN when either map is constant. */
export function spearman(a: NumericArray, b: NumericArray): number {
  requireSameLength(a, b, 'spearman');
  return pearson(averageRanks(a), averageRanks(b));
}

/**
 * Spearman's rank correlation of |a| and |b|: the sanity check reports both, because a map whose
 * sign flips under randomization can keep the same absolute pattern (Adebayo et al., NeurIPS 2018).
 */
export function spearmanAbs(a: NumericArray, b: NumericArray): number {
  requireSameLength(a, b, 'spearmanAbs');
  return spearman(absolute(a), absolute(b));
}

function absolute(a: NumericArray): Float64Array {
  const out = new Float64Array(a.length);
  for (let i = 0; i < a.length; i++) out[i] = Math.abs(a[i]);
  return out;
}
