import { UserError } from '../errors';
import { NumericArray } from './checks';
import { InputLayout, channelStride, requireInputSize } from './input-layout';

/**
 * Gaussian blur of a batch-1 image tensor in the model's own input space, channel by channel:
 * the starting point of the insertion curve (Petsiuk et al., BMVC 2018). Separable, with a kernel
 * of radius ⌈3σ⌉ (common practice, no source) normalised to sum 1, and a reflecting border that
 * does not repeat the edge pixel (… c b | a b c d | c b …), so no dark or bright frame is made up.
 */
export function gaussianBlurInput(
  input: NumericArray, w: number, h: number, channels: number, layout: InputLayout, sigma: number,
): Float32Array {
  requireInputSize(input, w, h, channels, 'gaussianBlurInput');
  if (!(sigma >= 0) || !Number.isFinite(sigma)) throw new UserError(`gaussianBlurInput: sigma must be a finite number ≥ 0, got ${sigma}`);
  const out = Float32Array.from(input);
  if (sigma === 0) return out;
  const radius = Math.ceil(3 * sigma);
  const kernel = new Float64Array(2 * radius + 1);
  let sum = 0;
  for (let t = -radius; t <= radius; t++) sum += kernel[t + radius] = Math.exp(-(t * t) / (2 * sigma * sigma));
  for (let t = 0; t < kernel.length; t++) kernel[t] /= sum;

  const pixels = w * h;
  const stride = channelStride(layout, pixels, channels);
  const xTaps = reflectTaps(w, radius);
  const yTaps = reflectTaps(h, radius);
  const plane = new Float64Array(pixels);
  const rows = new Float64Array(pixels);
  for (let c = 0; c < channels; c++) {
    const base = c * stride.channel;
    for (let p = 0; p < pixels; p++) plane[p] = input[base + p * stride.pixel];
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        let s = 0;
        for (let t = 0; t < kernel.length; t++) s += kernel[t] * plane[y * w + xTaps[x * kernel.length + t]];
        rows[y * w + x] = s;
      }
    }
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        let s = 0;
        for (let t = 0; t < kernel.length; t++) s += kernel[t] * rows[yTaps[y * kernel.length + t] * w + x];
        out[base + (y * w + x) * stride.pixel] = s;
      }
    }
  }
  return out;
}

/** For each position i and kernel offset t ∈ [−r, r], the reflected source index of i + t. */
function reflectTaps(n: number, r: number): Int32Array {
  const taps = new Int32Array(n * (2 * r + 1));
  for (let i = 0; i < n; i++) for (let t = -r; t <= r; t++) taps[i * (2 * r + 1) + t + r] = reflectIndex(i + t, n);
  return taps;
}

/** Reflect an index into [0, n) without repeating the edge; the pattern has period 2(n−1). */
export function reflectIndex(i: number, n: number): number {
  if (n === 1) return 0;
  const period = 2 * (n - 1);
  let k = ((i % period) + period) % period;
  if (k >= n) k = period - k;
  return k;
}
