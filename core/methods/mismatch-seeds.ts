/**
 * Seed rows for the variance term of the mismatch statistics (DESIGN §4): R·σ² = diag(JᵀPJ),
 * P = I − 11ᵀ/R. Every design returns rows v (already weighted) with Σ vvᵀ = P exactly (exact
 * sweeps) or in expectation (probes), so the plan's head needs no mean row (mean 'zero'); only
 * the plain definition (one-hot e_r, and Rademacher ±1 probes as published) keeps Σ vvᵀ = I and
 * subtracts the mean term (mean 'uniform': the row 1/R).
 */
import { mulberry32 } from '../metrics/random';
import { PreparedModel } from '../plan/prepared';
import { headBasis, HeadBasis } from './head-basis';

/**
 * rademacher: K ±1 probes (Hutchinson-type, Bekas, Kokiopoulou & Saad 2007), E[vvᵀ] = I.
 * centered:   the same probes with their mean removed (orthogonal to the all-ones vector), E[vvᵀ] = P.
 * spectral:   the top K singular directions of the centred head weights: deterministic, a lower bound.
 * rescaled:   the same K directions, their sum scaled by Σλ / Σ_{top K} λ (the share the dropped
 *             directions would add if the backward map treated all directions alike; our own
 *             rule): deterministic, exact when the rank fits in K, no longer a bound.
 * deflated:   the top k of those exactly plus K − k centred probes of the remaining directions,
 *             unbiased; k minimises the residual share over √(probes left) (our own rule).
 */
export type ProbeDesign = 'rademacher' | 'centered' | 'spectral' | 'rescaled' | 'deflated';
export const PROBE_DESIGNS: readonly ProbeDesign[] = ['rademacher', 'centered', 'spectral', 'rescaled', 'deflated'];
/** Chosen by test/bench/probe-study.ts: the highest Pearson at every K on both study models, the lowest rel L2 on ResNet-18, and deterministic. */
export const DEFAULT_PROBE_DESIGN: ProbeDesign = 'rescaled';

export type SweepPlan =
  | { mode: 'exact'; basis?: 'auto' | 'one-hot' }
  | { mode: 'probe'; k: number; seed: number; design?: ProbeDesign };

export interface SweepSeeds {
  /** n rows of R values, row-major, each already scaled by the square root of its weight. */
  rows: Float32Array;
  n: number;
  mean: 'uniform' | 'zero';
  /** What was actually used (a spectral design falls back to centred probes without a linear head). */
  used: 'one-hot' | 'centered one-hot' | 'spectral basis' | ProbeDesign;
  /** Spectral directions taken exactly (deflated and spectral designs). */
  exactDirections?: number;
}

export function sweepSeeds(pm: PreparedModel, plan: SweepPlan): SweepSeeds {
  const R = pm.scores.numClasses;
  if (plan.mode === 'exact') {
    const basis = plan.basis === 'one-hot' ? undefined : headBasis(pm);
    if (basis) return { rows: basis.seeds(basis.rank), n: basis.rank, mean: 'zero', used: 'spectral basis', exactDirections: basis.rank };
    const rows = new Float32Array(R * R);
    const centred = plan.basis !== 'one-hot';
    for (let r = 0; r < R; r++) {
      if (centred) rows.fill(-1 / R, r * R, (r + 1) * R);
      rows[r * R + r] += 1;
    }
    return { rows, n: R, mean: centred ? 'zero' : 'uniform', used: centred ? 'centered one-hot' : 'one-hot' };
  }
  const design = plan.design ?? DEFAULT_PROBE_DESIGN;
  const K = plan.k;
  const rand = mulberry32(plan.seed);
  const rademacher = (): Float64Array => Float64Array.from({ length: R }, () => (rand() < 0.5 ? -1 : 1));
  const basis = design === 'spectral' || design === 'rescaled' || design === 'deflated' ? headBasis(pm) : undefined;
  if (design === 'rademacher') {
    const rows = new Float32Array(K * R);
    for (let i = 0; i < K; i++) rows.set(scaled(rademacher(), 1 / Math.sqrt(K)), i * R);
    return { rows, n: K, mean: 'uniform', used: 'rademacher' };
  }
  if ((design === 'spectral' || design === 'rescaled') && basis) {
    const n = Math.min(K, basis.rank);
    const rows = basis.seeds(n);
    if (design === 'rescaled' && n < basis.rank) {
      const sum = (m: number) => basis.values.subarray(0, m).reduce((a, b) => a + b, 0);
      const scale = Math.sqrt(sum(basis.rank) / sum(n));
      for (let i = 0; i < rows.length; i++) rows[i] *= scale;
    }
    return { rows, n, mean: 'zero', used: design, exactDirections: n };
  }
  const k = design === 'deflated' && basis ? deflationSize(basis, K) : 0;
  const rows = new Float32Array(K * R);
  const exact = basis ? basis.seeds(k) : new Float32Array(0);
  rows.set(exact);
  const probes = basis && k >= basis.rank ? 0 : K - k;
  for (let i = 0; i < probes; i++) {
    const v = rademacher();
    centre(v);
    // Remove the directions already taken exactly: v ← v − Σ_{j<k} u_j (u_jᵀ v).
    for (let j = 0; j < k; j++) {
      const u = exact.subarray(j * R, (j + 1) * R);
      let dot = 0;
      for (let r = 0; r < R; r++) dot += u[r] * v[r];
      for (let r = 0; r < R; r++) v[r] -= dot * u[r];
    }
    rows.set(scaled(v, 1 / Math.sqrt(probes)), (k + i) * R);
  }
  const used = basis ? 'deflated' : 'centered';
  return { rows: rows.subarray(0, (k + probes) * R), n: k + probes, mean: 'zero', used, exactDirections: basis ? k : undefined };
}

/**
 * How many top directions to take exactly out of K: the probe error of the rest scales like its
 * share of the spectrum over √(probes left) (Hutchinson's variance falls as 1/K for a fixed
 * matrix; the share is a proxy that treats the backward map as isotropic — our own rule). All
 * of them when the rank fits in K, which makes the estimate exact.
 */
export function deflationSize(basis: HeadBasis, K: number): number {
  if (basis.rank <= K) return basis.rank;
  const total = basis.values.reduce((a, b) => a + b, 0);
  let best = 0, bestCost = Infinity, rest = total;
  for (let k = 0; k < K; k++) {
    const cost = rest / total / Math.sqrt(K - k);
    if (cost < bestCost) { bestCost = cost; best = k; }
    rest -= basis.values[k];
  }
  return best;
}

function centre(v: Float64Array): void {
  let mean = 0;
  for (const x of v) mean += x;
  mean /= v.length;
  for (let i = 0; i < v.length; i++) v[i] -= mean;
}

function scaled(v: Float64Array, s: number): Float32Array {
  return Float32Array.from(v, (x) => x * s);
}
