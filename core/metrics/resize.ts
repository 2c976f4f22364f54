import { NumericArray, requireDims, requireSize } from './checks';

/**
 * Bilinear resize of a row-major w×h map to W×H with half-pixel centres, the convention of the
 * ONNX Resize operator with mode `linear` and coordinate_transformation_mode `half_pixel`
 * (ONNX operator spec, Resize): x_original = (x_resized + 0.5) / scale − 0.5 with scale = W / w,
 * and likewise for y. Coordinates that fall outside [0, w−1] are clamped to the edge pixel, so
 * the border rows repeat the edge values as the runtime does. Using the same convention as the
 * display path keeps a map scored at mask resolution identical to the one the user sees.
 */
export function resizeBilinear(map: NumericArray, w: number, h: number, W: number, H: number): Float32Array {
  requireSize(map, w, h, 'resizeBilinear (source)');
  requireDims(W, H, 'resizeBilinear (target)');
  const xs = sourceTaps(w, W);
  const ys = sourceTaps(h, H);
  const out = new Float32Array(W * H);
  for (let Y = 0; Y < H; Y++) {
    const y0 = ys.lo[Y];
    const y1 = ys.hi[Y];
    const fy = ys.frac[Y];
    for (let X = 0; X < W; X++) {
      const x0 = xs.lo[X];
      const x1 = xs.hi[X];
      const fx = xs.frac[X];
      const top = map[y0 * w + x0] * (1 - fx) + map[y0 * w + x1] * fx;
      const bottom = map[y1 * w + x0] * (1 - fx) + map[y1 * w + x1] * fx;
      out[Y * W + X] = top * (1 - fy) + bottom * fy;
    }
  }
  return out;
}

/** For each output coordinate, the two source taps and the weight of the upper one. */
function sourceTaps(n: number, N: number): { lo: Int32Array; hi: Int32Array; frac: Float64Array } {
  const scale = N / n;
  const lo = new Int32Array(N);
  const hi = new Int32Array(N);
  const frac = new Float64Array(N);
  for (let i = 0; i < N; i++) {
    const src = Math.min(Math.max((i + 0.5) / scale - 0.5, 0), n - 1);
    const l = Math.floor(src);
    lo[i] = l;
    hi[i] = Math.min(l + 1, n - 1);
    frac[i] = src - l;
  }
  return { lo, hi, frac };
}
