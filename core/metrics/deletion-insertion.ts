import { UserError } from '../errors';
import { NumericArray } from './checks';
import { InputLayout, channelStride, requireInputSize } from './input-layout';
import { trapezoidArea } from './trapezoid';

/** One curve: x the fraction of pixels changed (0 → 1), y the fact's probability, auc its trapezoid area. */
export interface FaithfulnessCurve {
  x: number[];
  y: number[];
  auc: number;
}

export interface DeletionInsertionRequest {
  /** Pixel indices (row-major over height×width), most salient first; a permutation of all pixels. */
  order: ArrayLike<number>;
  width: number;
  height: number;
  channels: number;
  layout: InputLayout;
  /** The preprocessed model input, batch 1. */
  input: NumericArray;
  /** The same input blurred (gaussianBlurInput): where insertion starts. */
  blurred: NumericArray;
  /** Pixels changed between two scored steps; the last step may change fewer. */
  stepPixels: number;
  /** The fact's probability for each input, in order. */
  scoreBatch: (inputs: Float32Array[]) => Promise<number[]>;
  /** Inputs per scoreBatch call (default 16). */
  batchSize?: number;
  /** Checked between batches; an aborted signal stops the work with its reason. */
  signal?: AbortSignal;
  /** Called after each batch with the inputs scored so far and the total. */
  onProgress?: (done: number, total: number) => void;
}

/**
 * Deletion and insertion curves (Petsiuk, Das & Saenko, BMVC 2018 — recalled, not re-read).
 * Deletion sets the pixels to 0 in the model's input space (all channels of a pixel), most
 * salient first, and follows the fact's probability down; insertion starts from the blurred input
 * and copies the original pixels back in the same order, following it up. Each curve is sampled
 * every `stepPixels` pixels from x = 0 (nothing changed) to x = 1 (every pixel changed) and
 * summarised by its trapezoid area: a faithful map has a low deletion and a high insertion area.
 */
export async function deletionInsertion(
  req: DeletionInsertionRequest,
): Promise<{ deletion: FaithfulnessCurve; insertion: FaithfulnessCurve }> {
  const { width, height, channels, layout } = req;
  requireInputSize(req.input, width, height, channels, 'deletionInsertion (input)');
  requireInputSize(req.blurred, width, height, channels, 'deletionInsertion (blurred)');
  const pixels = width * height;
  requirePermutation(req.order, pixels);
  if (!Number.isInteger(req.stepPixels) || req.stepPixels < 1) {
    throw new UserError(`deletionInsertion: stepPixels must be a positive integer, got ${req.stepPixels}`);
  }
  const batchSize = req.batchSize ?? 16;
  if (!Number.isInteger(batchSize) || batchSize < 1) throw new UserError(`deletionInsertion: batchSize must be a positive integer, got ${batchSize}`);

  const counts: number[] = [];
  for (let k = 0; k < pixels; k += req.stepPixels) counts.push(k);
  counts.push(pixels);
  const x = counts.map((k) => k / pixels);

  const stride = channelStride(layout, pixels, channels);
  const total = 2 * counts.length;
  let done = 0;
  const progress = (n: number): void => {
    done += n;
    req.onProgress?.(done, total);
  };

  // Deletion: from the input, zero each next pixel. Insertion: from the blurred input, copy each next pixel back.
  const deletionY = await scoreSteps(req, counts, batchSize, Float32Array.from(req.input), (state, p) => {
    for (let c = 0; c < channels; c++) state[p * stride.pixel + c * stride.channel] = 0;
  }, progress);
  const insertionY = await scoreSteps(req, counts, batchSize, Float32Array.from(req.blurred), (state, p) => {
    for (let c = 0; c < channels; c++) {
      const i = p * stride.pixel + c * stride.channel;
      state[i] = req.input[i];
    }
  }, progress);

  return {
    deletion: { x, y: deletionY, auc: trapezoidArea(x, deletionY) },
    insertion: { x: x.slice(), y: insertionY, auc: trapezoidArea(x, insertionY) },
  };
}

/** Walk the order, snapshot the state at each count, and score the snapshots batch by batch. */
async function scoreSteps(
  req: DeletionInsertionRequest,
  counts: number[],
  batchSize: number,
  state: Float32Array,
  change: (state: Float32Array, pixel: number) => void,
  progress: (n: number) => void,
): Promise<number[]> {
  const scores: number[] = [];
  let applied = 0;
  for (let first = 0; first < counts.length; first += batchSize) {
    if (req.signal?.aborted) throw req.signal.reason ?? new Error('deletionInsertion cancelled');
    const batch: Float32Array[] = [];
    for (const k of counts.slice(first, first + batchSize)) {
      for (; applied < k; applied++) change(state, req.order[applied]);
      batch.push(state.slice());
    }
    const got = await req.scoreBatch(batch);
    if (got.length !== batch.length) {
      throw new Error(`deletionInsertion: scoreBatch returned ${got.length} scores for ${batch.length} inputs`);
    }
    scores.push(...got);
    progress(batch.length);
  }
  return scores;
}

function requirePermutation(order: ArrayLike<number>, pixels: number): void {
  if (order.length !== pixels) {
    throw new UserError(`deletionInsertion: the pixel order has ${order.length} entries for ${pixels} pixels`, 'build it with pixelOrder(map) from a map at input resolution');
  }
  const seen = new Uint8Array(pixels);
  for (let i = 0; i < pixels; i++) {
    const p = order[i];
    if (!Number.isInteger(p) || p < 0 || p >= pixels || seen[p]) {
      throw new UserError(`deletionInsertion: the pixel order is not a permutation (entry ${i} is ${p})`, 'build it with pixelOrder(map)');
    }
    seen[p] = 1;
  }
}
