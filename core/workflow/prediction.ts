/** Scores to ranked class probabilities. */
export function softmax(z: Float32Array): Float32Array {
  const m = Math.max(...z);
  const e = z.map((v) => Math.exp(v - m));
  const s = e.reduce((a, b) => a + b, 0);
  return e.map((v) => v / s);
}

export function ranked(p: Float32Array, labels: string[], top: number): { index: number; label: string; p: number }[] {
  return Array.from(p, (v, i) => ({ index: i, label: labels[i], p: v })).sort((a, b) => b.p - a.p).slice(0, top);
}
