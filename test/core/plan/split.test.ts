/**
 * The forward/backward split of a plan: the forward graph never reads a seed, the backward never
 * recomputes what depends on the image alone, and a chunked sweep through the split plan gives
 * the same maps as one run of the whole plan (which test/core/methods checks against the formulas).
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps, Question } from '../../../core/methods/maps';
import { bytesPerSeed } from '../../../core/engine/budget';
import { composePlan, SEED_BASE, SEED_COEF } from '../../../core/plan/compose';
import { loadModel } from '../../../core/model/load';
import { readNpy } from '../../../core/io/npy';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

const RESNET = path.join(FIXTURES, 'arch', 'resnet');

describe('forward/backward split of a plan', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('puts seed-dependent nodes only in the backward and image-only nodes only in the forward', async () => {
    const pm = await engine.prepare(loadModel(path.join(RESNET, 'model.onnx')), [1, 3, 64, 64]);
    const plan = composePlan(pm, { passes: [{ relu: 'standard', layers: ['stage2'], heads: ['mismatch'] }], split: true });
    const split = plan.split!;
    const fIn = new Set((split.forward.graph!.input ?? []).map((i) => i.name));
    assert.deepEqual([...fIn], [pm.model.input.name]);
    const fNodes = split.forward.graph!.node!, bNodes = split.backward.graph!.node!;
    assert.ok(!fNodes.some((n) => (n.input ?? []).some((i) => i === SEED_BASE || i === SEED_COEF)));
    // The original forward convolutions all run in the forward graph and none in the backward.
    const forwardNames = new Set((pm.model.proto.graph!.node ?? []).map((n) => n.name));
    assert.ok(!bNodes.some((n) => forwardNames.has(n.name)), 'no forward node is recomputed per chunk');
    assert.ok(split.boundary.includes('stage2'), 'the layer activation crosses for the weighted map');
    assert.ok(split.forwardOutputs.includes(plan.scoresOutput));
  });

  it('a chunked sweep through the split plan equals one run of the whole plan', async () => {
    const pm = await engine.prepare(loadModel(path.join(RESNET, 'model.onnx')), [1, 3, 64, 64]);
    const x = Float32Array.from(toNumbers((await readNpy(path.join(RESNET, 'input.npy'))).data));
    const qs: Question[] = [{ kind: 'mismatch', fact: 0 }, { kind: 'mismatch', fact: 0, mismatch: 'gradient' }];
    for (const exactBasis of ['auto', 'one-hot'] as const) {
      const whole = await explainMaps(engine, pm, x, qs, ['stage2'], { estimate: { mode: 'exact' }, exactBasis });
      const chunked = await explainMaps(engine, pm, x, qs, ['stage2'], { estimate: { mode: 'exact' }, exactBasis, budgetBytes: 4 * bytesPerSeed(pm, ['stage2']) });
      for (let i = 0; i < 2; i++) {
        assert.ok(relL2(chunked[i].raw.data, whole[i].raw.data) < 1e-5, `${exactBasis} ${i}: ${relL2(chunked[i].raw.data, whole[i].raw.data)}`);
        assert.ok(relL2(chunked[i].up.data, whole[i].up.data) < 1e-5);
      }
    }
  });
});
