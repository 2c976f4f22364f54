import { NumericArray, requireSameLength, requireSize, scaleToUnit } from './checks';

export interface SsimOptions {
  /** Side of the square Gaussian window; Wang et al. use 11. Shrunk to the largest odd size that fits a smaller map. */
  window?: number;
  /** Standard deviation of the Gaussian window; Wang et al. use 1.5. */
  sigma?: number;
  /** Stabilising constants C1 = (K1·L)², C2 = (K2·L)²; Wang et al. use K1 = 0.01, K2 = 0.03. */
  k1?: number;
  k2?: number;
  /**
   * `unit` (default): scale each map to [0,1] by its own min and max before comparing, data range
   * L = 1. Saliency maps have arbitrary units that change under weight randomization, so only
   * their shape is compared. `none`: compare the values as given, with `dataRange` as L.
   */
  scale?: 'unit' | 'none';
  dataRange?: number;
}

/**
 * Mean structural similarity (Wang, Bovik, Sheikh & Simoncelli, IEEE TIP 2004):
 * SSIM = ((2μxμy + C1)(2σxy + C2)) / ((μx² + μy² + C1)(σx² + σy² + C2)) with local statistics
 * under a normalised Gaussian window, averaged over every window position that lies wholly
 * inside the map (no padding, as in the paper's reference implementation). Two constant maps
 * score exactly 1 by the formula (all local variances are 0, the C terms cancel).
 */
export function ssim(a: NumericArray, b: NumericArray, w: number, h: number, opts: SsimOptions = {}): number {
  requireSize(a, w, h, 'ssim');
  requireSameLength(a, b, 'ssim');
  const scale = opts.scale ?? 'unit';
  const L = scale === 'unit' ? 1 : (opts.dataRange ?? 1);
  const x = scale === 'unit' ? scaleToUnit(a) : Float64Array.from(a);
  const y = scale === 'unit' ? scaleToUnit(b) : Float64Array.from(b);
  const c1 = ((opts.k1 ?? 0.01) * L) ** 2;
  const c2 = ((opts.k2 ?? 0.03) * L) ** 2;
  const size = fittingWindow(opts.window ?? 11, w, h);
  const kernel = gaussianKernel(size, opts.sigma ?? 1.5);

  const n = w * h;
  const xx = new Float64Array(n);
  const yy = new Float64Array(n);
  const xy = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    xx[i] = x[i] * x[i];
    yy[i] = y[i] * y[i];
    xy[i] = x[i] * y[i];
  }
  const mx = filterValid(x, w, h, kernel);
  const my = filterValid(y, w, h, kernel);
  const mxx = filterValid(xx, w, h, kernel);
  const myy = filterValid(yy, w, h, kernel);
  const mxy = filterValid(xy, w, h, kernel);

  let total = 0;
  for (let i = 0; i < mx.length; i++) {
    const ux = mx[i];
    const uy = my[i];
    const vx = mxx[i] - ux * ux;
    const vy = myy[i] - uy * uy;
    const cxy = mxy[i] - ux * uy;
    total += ((2 * ux * uy + c1) * (2 * cxy + c2)) / ((ux * ux + uy * uy + c1) * (vx + vy + c2));
  }
  return total / mx.length;
}

/** The requested odd window size, shrunk to the largest odd size not above the map's shorter side. */
function fittingWindow(requested: number, w: number, h: number): number {
  let size = Math.min(requested, w, h);
  if (size % 2 === 0) size -= 1;
  return Math.max(size, 1);
}

/** Normalised 1-D Gaussian of odd length `size`; the 2-D window is its outer product. */
export function gaussianKernel(size: number, sigma: number): Float64Array {
  const k = new Float64Array(size);
  const r = (size - 1) / 2;
  let sum = 0;
  for (let i = 0; i < size; i++) {
    k[i] = Math.exp(-((i - r) ** 2) / (2 * sigma * sigma));
    sum += k[i];
  }
  for (let i = 0; i < size; i++) k[i] /= sum;
  return k;
}

/** Separable filtering keeping only positions where the window lies inside the map: (w−k+1)×(h−k+1). */
function filterValid(src: Float64Array, w: number, h: number, k: Float64Array): Float64Array {
  const size = k.length;
  const ow = w - size + 1;
  const oh = h - size + 1;
  const rows = new Float64Array(ow * h);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let t = 0; t < size; t++) s += k[t] * src[y * w + x + t];
      rows[y * ow + x] = s;
    }
  }
  const out = new Float64Array(ow * oh);
  for (let y = 0; y < oh; y++) {
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let t = 0; t < size; t++) s += k[t] * rows[(y + t) * ow + x];
      out[y * ow + x] = s;
    }
  }
  return out;
}
