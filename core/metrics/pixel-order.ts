import { NumericArray } from './checks';

/**
 * Pixel indices from most to least salient: descending map value, ties kept in index order
 * (row-major) so the order — and every curve built on it — is reproducible. NaN sorts last.
 */
export function pixelOrder(map: NumericArray): Uint32Array {
  const n = map.length;
  const order = new Uint32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  const key = (i: number): number => (Number.isNaN(map[i]) ? -Infinity : map[i]);
  order.sort((i, j) => {
    const ki = key(i);
    const kj = key(j);
    return ki > kj ? -1 : ki < kj ? 1 : i - j;
  });
  return order;
}
