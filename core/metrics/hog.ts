import { NumericArray, requireSameLength, requireSize, scaleToUnit } from './checks';
import { pearson } from './correlation';
import { resizeBilinear } from './resize';

export interface HogOptions {
  /** Cell side in pixels; Dalal & Triggs found 8×8 cells best for their task. */
  cellSize?: number;
  /** Block side in cells, blocks overlapping with a stride of one cell; Dalal & Triggs use 2×2. */
  blockSize?: number;
  /** Unsigned orientation bins over 0–180°; Dalal & Triggs use 9. */
  bins?: number;
  /** L2-Hys clipping value; Dalal & Triggs use 0.2. */
  clip?: number;
  /**
   * Maps whose shorter side is below this are first upsampled bilinearly by the smallest integer
   * factor that reaches it, so a 7×7 layer map still spans several cells and blocks (this
   * project's choice; 32 gives 4×4 cells of 8 px, common practice, no source).
   */
  minSide?: number;
}

const EPSILON = 1e-5; // the small constant in the block norm, so an empty block stays 0 (Dalal & Triggs)

/**
 * Histogram-of-oriented-gradients descriptor (Dalal & Triggs, CVPR 2005), used by the sanity
 * check to compare the edge structure of two maps. The map is first scaled to [0,1] by its own
 * min and max (maps have arbitrary units). Gradients by the centred [−1,0,1] filter without
 * smoothing (edge pixels repeated at the border); each pixel votes its gradient magnitude into
 * the two nearest of `bins` unsigned orientation bins (bilinear in orientation; the paper also
 * interpolates in position, which this project leaves out: the cell is the pixel's own);
 * blocks of blockSize×blockSize cells with a one-cell stride are L2-Hys normalised
 * (L2-normalise, clip at `clip`, L2-normalise again). Pixels past the last whole cell are unused.
 * Returns the concatenated block vectors, blocks in row-major order, cells row-major inside a block.
 */
export function hogFeatures(map: NumericArray, w: number, h: number, opts: HogOptions = {}): Float64Array {
  requireSize(map, w, h, 'hogFeatures');
  const cell = opts.cellSize ?? 8;
  const block = opts.blockSize ?? 2;
  const bins = opts.bins ?? 9;
  const clip = opts.clip ?? 0.2;
  const minSide = opts.minSide ?? 32;

  let W = w;
  let H = h;
  let img = scaleToUnit(map);
  const factor = Math.ceil(minSide / Math.min(w, h));
  if (factor > 1) {
    W = w * factor;
    H = h * factor;
    img = Float64Array.from(resizeBilinear(img, w, h, W, H));
  }
  const cellsX = Math.floor(W / cell);
  const cellsY = Math.floor(H / cell);
  if (cellsX < block || cellsY < block) {
    throw new RangeError(`hogFeatures: a ${W}×${H} map holds fewer than ${block}×${block} cells of ${cell} px`);
  }

  const hist = cellHistograms(img, W, H, cell, cellsX, cellsY, bins);
  const blocksX = cellsX - block + 1;
  const blocksY = cellsY - block + 1;
  const blockLen = block * block * bins;
  const out = new Float64Array(blocksX * blocksY * blockLen);
  const v = new Float64Array(blockLen);
  for (let by = 0; by < blocksY; by++) {
    for (let bx = 0; bx < blocksX; bx++) {
      let k = 0;
      for (let cy = by; cy < by + block; cy++) {
        for (let cx = bx; cx < bx + block; cx++) {
          const base = (cy * cellsX + cx) * bins;
          for (let b = 0; b < bins; b++) v[k++] = hist[base + b];
        }
      }
      l2Hys(v, clip);
      out.set(v, (by * blocksX + bx) * blockLen);
    }
  }
  return out;
}

/** Pearson correlation of the HOG descriptors of two maps of the same size (Adebayo et al., NeurIPS 2018). */
export function hogPearson(a: NumericArray, b: NumericArray, w: number, h: number, opts: HogOptions = {}): number {
  requireSameLength(a, b, 'hogPearson');
  return pearson(hogFeatures(a, w, h, opts), hogFeatures(b, w, h, opts));
}

function cellHistograms(
  img: Float64Array, W: number, H: number, cell: number, cellsX: number, cellsY: number, bins: number,
): Float64Array {
  const hist = new Float64Array(cellsX * cellsY * bins);
  const binWidth = Math.PI / bins;
  for (let y = 0; y < cellsY * cell; y++) {
    const up = Math.max(y - 1, 0);
    const down = Math.min(y + 1, H - 1);
    for (let x = 0; x < cellsX * cell; x++) {
      const left = Math.max(x - 1, 0);
      const right = Math.min(x + 1, W - 1);
      const gx = img[y * W + right] - img[y * W + left];
      const gy = img[down * W + x] - img[up * W + x];
      const mag = Math.hypot(gx, gy);
      if (mag === 0) continue;
      let theta = Math.atan2(gy, gx);
      if (theta < 0) theta += Math.PI;
      if (theta >= Math.PI) theta -= Math.PI;
      // Bin centres sit at (b + 0.5)·binWidth; split the vote between the two nearest, wrapping at 180°.
      const pos = theta / binWidth - 0.5;
      const lo = Math.floor(pos);
      const frac = pos - lo;
      const base = (Math.floor(y / cell) * cellsX + Math.floor(x / cell)) * bins;
      hist[base + ((lo + bins) % bins)] += mag * (1 - frac);
      hist[base + ((lo + 1) % bins)] += mag * frac;
    }
  }
  return hist;
}

/** L2-Hys: L2-normalise, clip each entry at `clip`, L2-normalise again (Dalal & Triggs, CVPR 2005). */
function l2Hys(v: Float64Array, clip: number): void {
  normalize(v);
  for (let i = 0; i < v.length; i++) if (v[i] > clip) v[i] = clip;
  normalize(v);
}

function normalize(v: Float64Array): void {
  let ss = 0;
  for (let i = 0; i < v.length; i++) ss += v[i] * v[i];
  const norm = Math.sqrt(ss + EPSILON * EPSILON);
  for (let i = 0; i < v.length; i++) v[i] /= norm;
}
