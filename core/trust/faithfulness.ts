/**
 * Faithfulness by deletion and insertion (Petsiuk, Das & Saenko, BMVC 2018 — recalled): a map
 * whose most salient pixels really carry the decision makes the fact's probability fall fast
 * when they are removed (set to 0 in input space) and rise fast when they are put back into a
 * blurred copy. Each map is compared with random pixel orders, the baseline any map must beat.
 */
import { deletionInsertion, FaithfulnessCurve, gaussianBlurInput, pixelOrder, randomMap, resizeBilinear } from '../metrics';
import { trapezoidArea } from '../metrics/trapezoid';
import { Curve, FaithfulnessFigures, FaithfulnessReport, RandomBaseline, RandomFigures, TrustMapKind } from './report';
import { inputGeometry, mapsAtInput, softmax, throwIfAborted, TrustSubject, unit } from './subject';

export interface FaithfulnessOptions {
  kinds: readonly TrustMapKind[];
  /** Scored points per curve after the start (default 50: 2% of the pixels per step). */
  steps?: number;
  /** σ of the insertion start, input pixels. Default 5% of the longer side: enough to hide a part's outline (this project's choice). */
  blurSigma?: number;
  /** Seeds of the random orders (default 3 seeds from `seed`). */
  randomSeeds?: number[];
  seed: number;
  maps?: Map<TrustMapKind, Float32Array>;
  /** Called after each batch of scored inputs with the inputs done so far and the total for this check. */
  onProgress?: (done: number, total: number) => void;
}

export const DEFAULT_FAITHFULNESS_STEPS = 50;
export const DEFAULT_RANDOM_ORDERS = 3;

/** Kinds upsampled from the layer grid (Grad-CAM); the others live at input resolution. */
const LAYER_GRID_KINDS: readonly TrustMapKind[] = ['evidence', 'contrast'];

export function baselineFor(kind: TrustMapKind): RandomBaseline {
  return LAYER_GRID_KINDS.includes(kind) ? 'layer_grid' : 'pixels';
}

/** Pixel orders a check scores (for progress): one per map kind and two random baselines per seed. */
export function faithfulnessOrders(kinds: number, seeds: number): number {
  return kinds + 2 * seeds;
}

export async function faithfulnessCheck(s: TrustSubject, opts: FaithfulnessOptions): Promise<FaithfulnessReport> {
  const { width, height, channels, layout } = inputGeometry(s.pm, s.layout);
  const pixels = width * height;
  const stepPixels = Math.max(1, Math.ceil(pixels / (opts.steps ?? DEFAULT_FAITHFULNESS_STEPS)));
  const blurSigma = opts.blurSigma ?? 0.05 * Math.max(width, height);
  const seeds = opts.randomSeeds ?? Array.from({ length: DEFAULT_RANDOM_ORDERS }, (_, i) => (opts.seed + 1000 * (i + 1)) >>> 0);
  const blurred = gaussianBlurInput(s.input, width, height, channels, layout, blurSigma);
  const maps = opts.maps ?? (await mapsAtInput(s, opts.kinds));
  const perOrder = 2 * (Math.ceil(pixels / stepPixels) + 1);
  const total = perOrder * faithfulnessOrders(opts.kinds.length, seeds.length);
  let finished = 0;
  const scoreBatch = async (inputs: Float32Array[]): Promise<number[]> => {
    const out: number[] = [];
    for (const x of inputs) out.push(unit(softmax(await s.engine.scores(s.pm, x))[s.fact]));
    return out;
  };
  const curves = async (map: ArrayLike<number>): Promise<FaithfulnessFigures> => {
    throwIfAborted(s.signal);
    const r = await deletionInsertion({
      order: pixelOrder(map), width, height, channels, layout, input: s.input, blurred, stepPixels, scoreBatch,
      signal: s.signal, onProgress: (done) => opts.onProgress?.(finished + done, total),
    });
    finished += perOrder;
    return { deletion: plain(r.deletion), insertion: plain(r.insertion) };
  };
  const out: FaithfulnessReport['maps'] = {};
  for (const k of opts.kinds) out[k] = { ...(await curves(maps.get(k)!)), baseline: baselineFor(k) };
  const grid = layerGrid(s);
  const randomOrders = async (draw: (seed: number) => Float32Array): Promise<RandomFigures> => {
    const rs: FaithfulnessFigures[] = [];
    for (const seed of seeds) rs.push(await curves(draw(seed)));
    return {
      deletion: meanCurve(rs.map((r) => r.deletion)), insertion: meanCurve(rs.map((r) => r.insertion)),
      seeds, deletion_auc: rs.map((r) => r.deletion.auc), insertion_auc: rs.map((r) => r.insertion.auc),
    };
  };
  const fine = await randomOrders((seed) => randomMap(width, height, seed));
  const coarse = await randomOrders((seed) => resizeBilinear(randomMap(grid[1], grid[0], seed), grid[1], grid[0], width, height));
  return { step_pixels: stepPixels, blur_sigma: blurSigma, maps: out, random: { pixels: fine, layer_grid: { ...coarse, grid } } };
}

/** The [h, w] grid of the subject's layer. */
function layerGrid(s: TrustSubject): [number, number] {
  const info = s.pm.layers.find((l) => l.id === s.layer);
  return info ? [info.grid[0], info.grid[1]] : [1, 1];
}

function plain(c: FaithfulnessCurve): Curve {
  return { x: c.x, y: c.y.map(unit), auc: unit(c.auc) };
}

/** Point-by-point mean of curves sampled at the same x; its area is the mean of their areas. */
function meanCurve(cs: Curve[]): Curve {
  const x = cs[0].x;
  const y = x.map((_, i) => cs.reduce((a, c) => a + c.y[i], 0) / cs.length);
  return { x, y, auc: unit(trapezoidArea(x, y)) };
}
