/**
 * Maps of the model's own prediction in one run (seeds from the in-graph top-2) equal the maps
 * asked for explicitly after a separate forward — themselves checked against Grad-CAM's formula
 * in maps.test.ts and against PyTorch in maps-vs-pytorch.test.ts.
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps, explainPrediction } from '../../../core/methods/maps';
import { loadModel } from '../../../core/model/load';
import { readNpy } from '../../../core/io/npy';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

describe('maps of the prediction in one run', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  for (const [kind, contrast] of [['evidence', undefined], ['contrast', 'margin'], ['contrast', 'loss']] as const) {
    it(`${kind}${contrast ? ` (${contrast})` : ''} of top-1 against top-2 equals explainMaps after scores()`, async () => {
      const dir = path.join(FIXTURES, 'arch', 'resnet');
      const pm = await engine.prepare(loadModel(path.join(dir, 'model.onnx')), [1, 3, 64, 64]);
      const x = Float32Array.from(toNumbers((await readNpy(path.join(dir, 'input.npy'))).data));
      const layers = ['stage1', 'stage2', 'stage3', 'stage4'];
      const one = await explainPrediction(engine, pm, x, kind, layers, { contrast });
      const z = await engine.scores(pm, x);
      const order = [...z.keys()].sort((a, b) => z[b] - z[a] || a - b);
      assert.equal(one.fact, order[0]);
      assert.equal(one.foil, order[1]);
      assert.ok(relL2(one.scores, z) < 1e-6);
      const q = kind === 'evidence' ? { kind, fact: order[0] } : { kind, fact: order[0], foil: order[1], contrast };
      const ref = await explainMaps(engine, pm, x, [q], layers);
      for (const layer of layers) {
        const a = one.maps.find((m) => m.layer === layer)!, b = ref.find((m) => m.layer === layer)!;
        assert.ok(relL2(a.raw.data, b.raw.data) < 1e-6, `${layer}: ${relL2(a.raw.data, b.raw.data)}`);
        assert.ok(relL2(a.up.data, b.up.data) < 1e-6);
      }
    });
  }
});
