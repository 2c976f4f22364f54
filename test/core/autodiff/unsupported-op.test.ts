/** An op without a gradient rule: a named error for layers below it, layers above stay usable. */
import { strict as assert } from 'node:assert';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps } from '../../../core/methods/maps';
import { modelFromBytes } from '../../../core/model/load';
import { decodeModelProto, encodeModelProto } from '../../../core/model/proto';
import { UserError } from '../../../core/errors';
import { FIXTURES } from '../../helpers';

describe('an op with no gradient rule', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('names the op and node for layers below it and keeps the layers above explainable', async () => {
    const file = path.join(FIXTURES, 'arch', 'resnet', 'model.onnx');
    const proto = decodeModelProto(readFileSync(file));
    // Celu (ONNX opset 12) runs in onnxruntime but has no rule here; put it right after stage3.
    const nodes = proto.graph!.node!;
    const consumer = nodes.find((n) => (n.input ?? []).includes('stage3'))!;
    consumer.input = consumer.input!.map((i) => (i === 'stage3' ? 'stage3_celu' : i));
    for (const n of nodes) if (n !== consumer && (n.input ?? []).includes('stage3')) n.input = n.input!.map((i) => (i === 'stage3' ? 'stage3_celu' : i));
    nodes.splice(nodes.indexOf(consumer), 0, { op_type: 'Celu', name: 'odd_activation', input: ['stage3'], output: ['stage3_celu'] });
    const model = modelFromBytes(encodeModelProto(proto), 'celu-resnet.onnx');
    const pm = await engine.prepare(model, [1, 3, 64, 64]);
    const layer = (id: string) => pm.layers.find((l) => l.id === id)!;
    assert.deepEqual(layer('stage2').blockedBy, { opType: 'Celu', node: 'odd_activation' });
    assert.equal(layer('stage4').blockedBy, undefined);
    const x = new Float32Array(3 * 64 * 64).fill(0.1);
    await assert.rejects(explainMaps(engine, pm, x, [{ kind: 'evidence', fact: 0 }], ['stage2']),
      (e: unknown) => e instanceof UserError && /Celu node 'odd_activation'/.test(e.message));
    const ok = await explainMaps(engine, pm, x, [{ kind: 'evidence', fact: 0 }], ['stage4']);
    assert.equal(ok.length, 1);
  });
});
