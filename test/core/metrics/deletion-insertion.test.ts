import { strict as assert } from 'assert';
import { deletionInsertion, pixelOrder, randomMap } from '../../../core/metrics';
import type { DeletionInsertionRequest, InputLayout } from '../../../core/metrics';
import { UserError } from '../../../core/errors';

const close = (a: number, b: number, tol = 1e-6): void => assert.ok(Math.abs(a - b) < tol, `${a} vs ${b}`);

// Expected values are exact; the 1e-6 tolerance covers the float32 rounding of 0.2.
// Toy model: the "fact probability" is the share of the input mass inside a known patch that is
// still there, Σ_{patch, channels} x / Σ_{patch, channels} original. Deletion/insertion as in
// Petsiuk et al., BMVC 2018 (recalled); every expected area below is worked out by hand.
function patchScorer(w: number, channels: number, layout: InputLayout, patch: number[], original: Float32Array) {
  const pixels = original.length / channels;
  const at = (x: Float32Array, p: number, c: number): number => (layout === 'NCHW' ? x[c * pixels + p] : x[p * channels + c]);
  let full = 0;
  for (const p of patch) for (let c = 0; c < channels; c++) full += at(original, p, c);
  const calls: number[] = [];
  const scoreBatch = async (inputs: Float32Array[]): Promise<number[]> => {
    calls.push(inputs.length);
    return inputs.map((x) => {
      let s = 0;
      for (const p of patch) for (let c = 0; c < channels; c++) s += at(x, p, c);
      return s / full;
    });
  };
  return { scoreBatch, calls, w };
}

/** 4×4 image; the patch is the top-left 2×2 block, pixels 0, 1, 4, 5. */
const PATCH = [0, 1, 4, 5];
const patchMap = (): Float32Array => Float32Array.from({ length: 16 }, (_, i) => (PATCH.includes(i) ? 1 : 0));

function request(over: Partial<DeletionInsertionRequest> & Pick<DeletionInsertionRequest, 'order'>): DeletionInsertionRequest {
  const input = new Float32Array(16).fill(1);
  const { scoreBatch } = patchScorer(4, 1, 'NCHW', PATCH, input);
  return { width: 4, height: 4, channels: 1, layout: 'NCHW', input, blurred: new Float32Array(16).fill(0.2), stepPixels: 1, scoreBatch, ...over };
}

describe('metrics/deletionInsertion (Petsiuk et al., BMVC 2018)', () => {
  it('ideal order: deletion AUC 1/8, insertion AUC 0.9 (worked by hand)', async () => {
    // Order from the map: the 4 patch pixels first. Deletion y at k = 0..4 removed: 1, ¾, ½, ¼, 0,
    // then 0; x = k/16. Area = (⅞ + ⅝ + ⅜ + ⅛)/16 = 2/16 = 0.125.
    // Insertion from blur 0.2: y = (0.2·(4−k) + k)/4 = 0.2, 0.4, 0.6, 0.8, 1, then 1.
    // Area = (0.3 + 0.5 + 0.7 + 0.9)/16 + 12/16 = 0.15 + 0.75 = 0.9.
    const r = await deletionInsertion(request({ order: pixelOrder(patchMap()) }));
    assert.equal(r.deletion.x.length, 17);
    close(r.deletion.x[4], 0.25);
    assert.deepEqual(r.deletion.y.slice(0, 6), [1, 0.75, 0.5, 0.25, 0, 0]);
    close(r.deletion.auc, 0.125);
    close(r.insertion.auc, 0.9);
  });

  it('worst order: deletion AUC 7/8, insertion AUC 0.3', async () => {
    // Patch last: deletion stays 1 for 12 steps, then ¾ … 0: 12/16 + 2/16 = 0.875.
    // Insertion stays 0.2 for 12 steps, then 0.4 … 1: 12·0.2/16 + (0.3+0.5+0.7+0.9)/16 = 0.15 + 0.15.
    const r = await deletionInsertion(request({ order: pixelOrder(patchMap().map((v) => 1 - v)) }));
    close(r.deletion.auc, 0.875);
    close(r.insertion.auc, 0.3);
  });

  it('a last step shorter than stepPixels still ends at x = 1', async () => {
    // stepPixels 3: counts 0, 3, 6, 9, 12, 15, 16. Deletion y: 1, ¼, 0, …; area = (3/16)·(1+¼)/2 + (3/16)·(¼)/2 = 0.140625.
    const r = await deletionInsertion(request({ order: pixelOrder(patchMap()), stepPixels: 3 }));
    assert.deepEqual(r.deletion.x, [0, 3, 6, 9, 12, 15, 16].map((k) => k / 16));
    close(r.deletion.auc, 0.140625);
  });

  for (const layout of ['NCHW', 'NHWC'] as const) {
    it(`changes every channel of a pixel (${layout}, 3 channels)`, async () => {
      const input = new Float32Array(48).map((_, i) => 1 + (i % 5)); // unequal values per channel and pixel
      const { scoreBatch } = patchScorer(4, 3, layout, PATCH, input);
      const r = await deletionInsertion({
        order: pixelOrder(patchMap()), width: 4, height: 4, channels: 3, layout, input,
        blurred: new Float32Array(48), stepPixels: 4, scoreBatch,
      });
      // After 4 pixels the whole patch, all channels, is 0 (deletion) or original (insertion from 0).
      assert.deepEqual([r.deletion.y[0], r.deletion.y[1]], [1, 0]);
      assert.deepEqual([r.insertion.y[0], r.insertion.y[1]], [0, 1]);
      // x = 0, ¼, ½, ¾, 1: deletion area = ¼·½ = 0.125; insertion = ¼·½ + ¾ = 0.875.
      close(r.deletion.auc, 0.125);
      close(r.insertion.auc, 0.875);
    });
  }

  it('scores in batches of batchSize with the same result', async () => {
    const input = new Float32Array(16).fill(1);
    const scorer = patchScorer(4, 1, 'NCHW', PATCH, input);
    const small = await deletionInsertion(request({ order: pixelOrder(patchMap()), scoreBatch: scorer.scoreBatch, batchSize: 5 }));
    // 17 steps per curve in batches of 5: 5, 5, 5, 2 — twice.
    assert.deepEqual(scorer.calls, [5, 5, 5, 2, 5, 5, 5, 2]);
    const big = await deletionInsertion(request({ order: pixelOrder(patchMap()), batchSize: 100 }));
    assert.deepEqual(small, big);
  });

  it('a random order gives deletion AUC ≈ ½ for this linear toy score (averaged over seeds)', async () => {
    // Expected share of the patch left after removing k of N pixels at random is 1 − k/N, whose area is ½.
    const w = 32;
    const patch: number[] = [];
    for (let y = 10; y < 18; y++) for (let x = 4; x < 12; x++) patch.push(y * w + x);
    const input = new Float32Array(w * w).fill(1);
    const { scoreBatch } = patchScorer(w, 1, 'NCHW', patch, input);
    let total = 0;
    const seeds = 20;
    for (let seed = 0; seed < seeds; seed++) {
      const r = await deletionInsertion({
        order: pixelOrder(randomMap(w, w, seed)), width: w, height: w, channels: 1, layout: 'NCHW',
        input, blurred: new Float32Array(w * w), stepPixels: 8, scoreBatch, batchSize: 64,
      });
      total += r.deletion.auc;
    }
    close(total / seeds, 0.5, 0.03);
  });

  it('stops when the signal is aborted', async () => {
    const controller = new AbortController();
    controller.abort(new Error('cancelled by test'));
    await assert.rejects(deletionInsertion(request({ order: pixelOrder(patchMap()), signal: controller.signal })), /cancelled by test/);
  });

  it('refuses an order that is not a permutation of the pixels', async () => {
    const order = Array.from(pixelOrder(patchMap()));
    order[3] = order[2];
    await assert.rejects(deletionInsertion(request({ order })), UserError);
    await assert.rejects(deletionInsertion(request({ order: order.slice(0, 10) })), UserError);
  });
});
