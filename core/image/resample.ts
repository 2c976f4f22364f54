/**
 * Resampling of 8-bit RGB images for preprocessing, written out so that the exact arithmetic is
 * known and matches what most training pipelines used.
 *
 * Algorithm (the separable "bilinear" filter of Pillow's Image.resize, recalled from Pillow's
 * Resample.c and checked against Pillow 9.4 in test/core/image/resample.test.ts): for each output
 * pixel i along an axis of scale s = inSize/outSize, the centre is c = (i + 0.5)·s in input
 * coordinates; the filter is widened by f = max(s, 1) when shrinking (antialiasing), its support
 * is 1·f, and input pixel j (centre j + 0.5) gets weight tri((j + 0.5 − c)/f), tri(t) = max(0, 1 − |t|),
 * over j in [floor(c − f + 0.5), floor(c + f + 0.5)) clipped to the image, normalised to sum 1.
 * The horizontal pass runs first; its result is rounded to 8 bits (round half up) before the
 * vertical pass, as Pillow does.
 *
 * Why not sharp's resize: measured on random RGB noise, sharp 0.34 `kernel: 'linear'` differs
 * from Pillow BILINEAR by a mean of 28 levels (max 123) for 300×200 → 224×224 and 22 levels for
 * a 2× upsample, so a model trained on Pillow-resized images would see a different input.
 */

export type ResampleFilter = 'bilinear' | 'nearest';

interface AxisCoefficients {
  /** First input index for each output index. */
  start: Int32Array;
  /** Number of taps for each output index. */
  count: Int32Array;
  /** maxTaps weights per output index. */
  weights: Float64Array;
  maxTaps: number;
}

function axisCoefficients(inSize: number, outSize: number, filter: ResampleFilter): AxisCoefficients {
  const scale = inSize / outSize;
  if (filter === 'nearest') {
    // Pixel-centre sampling: output i takes input floor((i + 0.5)·s).
    const start = new Int32Array(outSize);
    for (let i = 0; i < outSize; i++) start[i] = Math.min(inSize - 1, Math.floor((i + 0.5) * scale));
    return { start, count: new Int32Array(outSize).fill(1), weights: new Float64Array(outSize).fill(1), maxTaps: 1 };
  }
  const filterScale = Math.max(scale, 1);
  const support = filterScale; // the triangle's support is 1, widened by filterScale
  const maxTaps = Math.ceil(support) * 2 + 1;
  const start = new Int32Array(outSize);
  const count = new Int32Array(outSize);
  const weights = new Float64Array(outSize * maxTaps);
  for (let i = 0; i < outSize; i++) {
    const centre = (i + 0.5) * scale;
    const lo = Math.max(0, Math.trunc(centre - support + 0.5));
    const hi = Math.min(inSize, Math.trunc(centre + support + 0.5));
    let sum = 0;
    for (let j = lo; j < hi; j++) {
      const t = Math.abs((j + 0.5 - centre) / filterScale);
      const w = t < 1 ? 1 - t : 0;
      weights[i * maxTaps + (j - lo)] = w;
      sum += w;
    }
    if (sum > 0) for (let j = 0; j < hi - lo; j++) weights[i * maxTaps + j] /= sum;
    start[i] = lo;
    count[i] = hi - lo;
  }
  return { start, count, weights, maxTaps };
}

const clampByte = (v: number) => (v <= 0 ? 0 : v >= 255 ? 255 : Math.floor(v + 0.5));

/**
 * Resizes interleaved 8-bit RGB (`sw`×`sh`) to `dw`×`dh`. Returns the input itself when the size
 * is unchanged.
 */
export function resizeRgb(
  src: Uint8Array,
  sw: number,
  sh: number,
  dw: number,
  dh: number,
  filter: ResampleFilter = 'bilinear',
): Uint8Array {
  if (sw === dw && sh === dh) return src;
  let cur = src;
  let curW = sw;
  if (dw !== sw) {
    const cx = axisCoefficients(sw, dw, filter);
    const out = new Uint8Array(dw * sh * 3);
    for (let y = 0; y < sh; y++) {
      const row = y * sw * 3;
      for (let x = 0; x < dw; x++) {
        const s0 = cx.start[x];
        const n = cx.count[x];
        const wo = x * cx.maxTaps;
        let r = 0, g = 0, b = 0;
        for (let k = 0; k < n; k++) {
          const w = cx.weights[wo + k];
          const p = row + (s0 + k) * 3;
          r += w * cur[p];
          g += w * cur[p + 1];
          b += w * cur[p + 2];
        }
        const o = (y * dw + x) * 3;
        out[o] = clampByte(r);
        out[o + 1] = clampByte(g);
        out[o + 2] = clampByte(b);
      }
    }
    cur = out;
    curW = dw;
  }
  if (dh !== sh) {
    const cy = axisCoefficients(sh, dh, filter);
    const out = new Uint8Array(curW * dh * 3);
    const stride = curW * 3;
    for (let y = 0; y < dh; y++) {
      const s0 = cy.start[y];
      const n = cy.count[y];
      const wo = y * cy.maxTaps;
      const orow = y * stride;
      for (let i = 0; i < stride; i++) {
        let v = 0;
        for (let k = 0; k < n; k++) v += cy.weights[wo + k] * cur[(s0 + k) * stride + i];
        out[orow + i] = clampByte(v);
      }
    }
    cur = out;
  }
  return cur;
}

/** Copies a rectangle out of interleaved RGB. */
export function cropRgb(src: Uint8Array, sw: number, left: number, top: number, w: number, h: number): Uint8Array {
  const out = new Uint8Array(w * h * 3);
  for (let y = 0; y < h; y++) {
    const from = ((top + y) * sw + left) * 3;
    out.set(src.subarray(from, from + w * 3), y * w * 3);
  }
  return out;
}
