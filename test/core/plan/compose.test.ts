/** Plan composition: what the backward asks of the forward. */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { composePlan } from '../../../core/plan/compose';
import { decodeModelProto } from '../../../core/model/proto';
import { loadModel } from '../../../core/model/load';
import { FIXTURES } from '../../helpers';

describe('plan composition', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('MaxPool exposes its Indices (and the backward scatters) only when a requested layer lies below the pool', async () => {
    const pm = await engine.prepare(loadModel(path.join(FIXTURES, 'arch', 'resnet', 'model.onnx')), [1, 3, 64, 64]);
    const plan = (layers: string[]) => decodeModelProto(composePlan(pm, { passes: [{ relu: 'standard', layers, heads: ['grad'] }] }).bytes).graph!.node!;
    const pool = (nodes: ReturnType<typeof plan>) => nodes.find((n) => n.op_type === 'MaxPool')!;
    const above = plan(['stage1', 'stage2']);
    assert.equal(pool(above).output!.length, 1);
    assert.ok(!above.some((n) => n.op_type === 'ScatterND'));
    const below = plan(['/model/relu/Relu_output_0']); // the stem ReLU, before the pool
    assert.equal(pool(below).output!.length, 2);
    assert.ok(below.some((n) => n.op_type === 'ScatterND'));
  });
});
