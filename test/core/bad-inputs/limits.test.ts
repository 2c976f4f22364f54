/**
 * Resource limits on the core side (issue 7, item 3): a request whose smallest seed batch cannot
 * fit the memory budget is refused with a UserError naming the budget and the layer, and a
 * cancel is honoured inside a chunk, not only between chunks; the engine keeps serving.
 */
import { strict as assert } from 'node:assert';
import { Engine } from '../../../core/engine/engine';
import { seedChunkSize } from '../../../core/engine/budget';
import { openModel } from '../../../core/workflow/open-model';
import { explainMaps } from '../../../core/methods/maps';
import { PreparedModel } from '../../../core/plan/prepared';
import { rejectsUserError } from '../io/support';
import { DEMO_MODEL } from './model-cases';

describe('resource limits', () => {
  const engine = new Engine();
  let pm: PreparedModel;
  let x: Float32Array;
  before(async () => {
    pm = (await openModel(engine, DEMO_MODEL)).pm;
    x = new Float32Array(pm.inputDims.reduce((a, b) => a * b, 1)).fill(0.3);
  });
  after(() => engine.dispose());

  it('a seed that cannot fit the memory budget is refused, naming the layer and the budget', async () => {
    const budgetBytes = 2 ** 20; // 1 MB: less than three seeds' gradients from the stem up
    await rejectsUserError(
      () => explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0 }], ['stem'], { budgetBytes }),
      /explaining 'stem' of .*parts-sorter\.onnx needs about [\d.]+ MB for its smallest batch of seeds, over the memory budget of 1\.0 MB/,
      /pick a deeper layer/,
    );
  });

  it('gradient questions are held to the budget too: refused when they cannot fit, answered when they can', async () => {
    const qs = [{ kind: 'evidence' as const, fact: 0 }, { kind: 'contrast' as const, fact: 0, foil: 1 }, { kind: 'detail' as const, fact: 0 }];
    await rejectsUserError(
      () => explainMaps(engine, pm, x, qs, ['stem'], { budgetBytes: 2 ** 20 }),
      /explaining 'stem', 'image' of .*parts-sorter\.onnx with 3 questions needs about [\d.]+ MB, over the memory budget of 1\.0 MB/,
      /ask fewer questions/,
    );
    const maps = await explainMaps(engine, pm, x, qs, ['stem']);
    assert.equal(maps.length, 3);
  });

  it('a budget that fits one seed per chunk still gives the same map as one big chunk', async () => {
    // Smallest budget that passes: three seed rows per run (sizes from seedChunkSize itself).
    let budget = 2 ** 20;
    for (;;) { try { seedChunkSize(pm, ['stage2'], budget); break; } catch { budget *= 1.25; } }
    const q = [{ kind: 'mismatch' as const, fact: 0 }];
    const small = await explainMaps(engine, pm, x, q, ['stage2'], { budgetBytes: budget });
    const big = await explainMaps(engine, pm, x, q, ['stage2']);
    const a = small[0].raw.data, b = big[0].raw.data;
    let num = 0, den = 0;
    for (let i = 0; i < a.length; i++) { num += (a[i] - b[i]) ** 2; den += b[i] ** 2; }
    assert.ok(Math.sqrt(num / den) < 1e-5, `chunked vs single-chunk rel L2 ${Math.sqrt(num / den)}`);
  });

  it('a cancel during a single-chunk run rejects with "cancelled" before the run returns, and the engine keeps serving', async () => {
    const layers = pm.layers.filter((l) => !l.blockedBy).map((l) => l.id);
    // All R seeds fit one chunk, so the only chance to stop is inside the native run.
    assert.ok(seedChunkSize(pm, layers) - 2 >= pm.scores.numClasses, 'the sweep is one chunk');
    const q = [{ kind: 'mismatch' as const, fact: 0 }];
    await explainMaps(engine, pm, x, q, layers); // compiles the plan, so the next call goes straight to the run
    for (const questions of [q, [{ kind: 'evidence' as const, fact: 1 }, { kind: 'detail' as const, fact: 1 }]]) {
      const abort = new AbortController();
      let progress = 0;
      const running = explainMaps(engine, pm, x, questions, layers, { signal: abort.signal, onProgress: () => progress++ });
      setImmediate(() => abort.abort());
      await rejectsUserError(() => running, /^cancelled$/);
      assert.equal(progress, 0, 'no chunk completed before the cancel took effect');
    }
    const again = await explainMaps(engine, pm, x, q, ['stage4']);
    assert.equal(again.length, 1);
  });
});
