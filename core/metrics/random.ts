import { UserError } from '../errors';
import { NumericArray, requireDims } from './checks';

/**
 * mulberry32: a small seeded 32-bit generator returning uniform numbers in [0,1). Widely used in
 * JavaScript for reproducible randomness (common practice, no published source; written from
 * memory). Enough for random baselines and noise, not for cryptography.
 */
export function mulberry32(seed: number): () => number {
  let state = seed >>> 0;
  return () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** A w×h map of independent uniform [0,1) values: the random baseline order for deletion/insertion. */
export function randomMap(w: number, h: number, seed: number): Float32Array {
  requireDims(w, h, 'randomMap');
  const next = mulberry32(seed);
  const out = new Float32Array(w * h);
  for (let i = 0; i < out.length; i++) out[i] = next();
  return out;
}

/**
 * Standard normal draws by the Box–Muller transform (Box & Muller, Ann. Math. Statist. 1958):
 * z0 = √(−2 ln u1)·cos(2πu2), z1 = √(−2 ln u1)·sin(2πu2) for u1 ∈ (0,1], u2 ∈ [0,1).
 */
export function gaussianSampler(seed: number): () => number {
  const next = mulberry32(seed);
  let spare: number | undefined;
  return () => {
    if (spare !== undefined) {
      const z = spare;
      spare = undefined;
      return z;
    }
    const u1 = 1 - next(); // (0,1]: keeps log finite
    const u2 = next();
    const r = Math.sqrt(-2 * Math.log(u1));
    spare = r * Math.sin(2 * Math.PI * u2);
    return r * Math.cos(2 * Math.PI * u2);
  };
}

/** A copy of the input with independent N(0, σ²) noise added to every value, reproducible from the seed. */
export function addGaussianNoise(input: NumericArray, sigma: number, seed: number): Float32Array {
  if (!(sigma >= 0) || !Number.isFinite(sigma)) throw new UserError(`addGaussianNoise: sigma must be a finite number ≥ 0, got ${sigma}`);
  const normal = gaussianSampler(seed);
  const out = new Float32Array(input.length);
  for (let i = 0; i < input.length; i++) out[i] = input[i] + sigma * normal();
  return out;
}
