/**
 * Deletion and insertion (Petsiuk, Das & Saenko, BMVC 2018 — recalled) on the demo model: the
 * curves' end points equal forward runs made here independently, and evidence maps beat random
 * orders of the same smoothness — lower deletion area, higher insertion area.
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { openModel } from '../../../core/workflow/open-model';
import { imageInput } from '../../../core/workflow/model-input';
import { faithfulnessCheck } from '../../../core/trust/faithfulness';
import { softmax, TrustSubject } from '../../../core/trust/subject';
import { gaussianBlurInput } from '../../../core/metrics';
import { FIXTURES } from '../../helpers';

const PARTS = path.join(FIXTURES, 'parts');
// The first eval image of four classes (a fixed choice, not tuned).
const IMAGES = ['bearing/bearing-0002.png', 'bolt/bolt-0004.png', 'gear/gear-0005.png', 'spring/spring-0003.png'];

describe('faithfulness on the demo model (deletion and insertion)', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('curve ends are the input, the all-zero input and the blurred input, scored independently', async () => {
    const ctx = await openModel(engine, path.join(PARTS, 'parts-sorter.onnx'));
    const x = (await imageInput(ctx, path.join(PARTS, 'eval', IMAGES[1]))).data;
    const p = (t: Float32Array) => engine.scores(ctx.pm, t).then((z) => softmax(z));
    const fact = (await p(x)).indexOf(Math.max(...(await p(x))));
    const s: TrustSubject = { engine, pm: ctx.pm, input: x, fact, foil: (fact + 1) % 8, layer: 'stage4', layout: 'NCHW' };
    const r = await faithfulnessCheck(s, { kinds: ['evidence'], seed: 1, steps: 10, randomSeeds: [3], blurSigma: 4 });
    const c = r.maps.evidence!;
    const close = (a: number, b: number) => assert.ok(Math.abs(a - b) < 1e-6, `${a} vs ${b}`);
    close(c.deletion.y[0], (await p(x))[fact]);
    close(c.deletion.y.at(-1)!, (await p(new Float32Array(x.length)))[fact]);
    close(c.insertion.y[0], (await p(gaussianBlurInput(x, 112, 112, 3, 'NCHW', 4)))[fact]);
    close(c.insertion.y.at(-1)!, (await p(x))[fact]);
    assert.equal(r.step_pixels, Math.ceil(112 * 112 / 10));
    // Points at 0, 1255, …, 11295 changed pixels (10 of them), then every pixel (x = 1).
    assert.equal(c.deletion.x.length, 11);
    assert.equal(c.deletion.x.at(-1), 1);
    assert.equal(c.baseline, 'layer_grid');
    assert.deepEqual(r.random.layer_grid.grid, [7, 7]);
  });

  it('evidence maps: deletion area below random orders of the layer grid, insertion area above', async () => {
    const ctx = await openModel(engine, path.join(PARTS, 'parts-sorter.onnx'));
    let del = 0, delRandom = 0, ins = 0, insRandom = 0;
    for (const img of IMAGES) {
      const x = (await imageInput(ctx, path.join(PARTS, 'eval', img))).data;
      const z = await engine.scores(ctx.pm, x);
      const fact = z.indexOf(Math.max(...z));
      const s: TrustSubject = { engine, pm: ctx.pm, input: x, fact, foil: (fact + 1) % 8, layer: 'stage4', layout: 'NCHW' };
      const r = await faithfulnessCheck(s, { kinds: ['evidence'], seed: 2018, steps: 20, randomSeeds: [11, 12] });
      del += r.maps.evidence!.deletion.auc / IMAGES.length;
      ins += r.maps.evidence!.insertion.auc / IMAGES.length;
      delRandom += r.random.layer_grid.deletion.auc / IMAGES.length;
      insRandom += r.random.layer_grid.insertion.auc / IMAGES.length;
    }
    assert.ok(del < delRandom - 0.1, `deletion ${del.toFixed(3)} vs random ${delRandom.toFixed(3)}`);
    assert.ok(ins > insRandom + 0.1, `insertion ${ins.toFixed(3)} vs random ${insRandom.toFixed(3)}`);
  });
});
