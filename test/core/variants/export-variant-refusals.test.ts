/**
 * Export variants that cannot be explained are refused at load with the tensor or node, the
 * reason and what to do (made by editing a committed variant, so each case differs from a model
 * that loads in one field only).
 */
import { strict as assert } from 'node:assert';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { UserError } from '../../../core/errors';
import { modelFromBytes } from '../../../core/model/load';
import { decodeModelProto, encodeModelProto, ModelProto } from '../../../core/model/proto';
import { Engine } from '../../../core/engine/engine';
import { FIXTURES } from '../../helpers';

const DIR = path.join(FIXTURES, 'variants');

function edited(variant: string, edit: (m: ModelProto) => void): Uint8Array {
  const m = decodeModelProto(readFileSync(path.join(DIR, variant, 'model.onnx')));
  edit(m);
  return encodeModelProto(m);
}

function refusal(f: () => unknown): UserError {
  try { f(); } catch (e) { if (e instanceof UserError) return e; throw e; }
  assert.fail('expected a UserError');
}

describe('export variants that are refused say why and what to do', () => {
  it('a fixed batch above 1 names the input and asks for batch 1 or a dynamic batch axis', () => {
    const bytes = edited('opset13', (m) => { m.graph!.input![0].type!.tensor_type!.shape!.dim![0] = { dim_value: 2 }; });
    const e = refusal(() => modelFromBytes(bytes, 'batch2.onnx'));
    assert.match(e.message, /input 'input' \[2,3,16,16\] has a fixed batch of 2/);
    assert.match(e.hint ?? '', /batch 1 or a dynamic batch axis/);
  });
  it('BatchNormalization with spatial=0 (opset 7–8 only) is refused at load, naming the node and asking for opset 9+', () => {
    // The opset-7 variant's Conv folded its BatchNormalization; add one (identity statistics) with spatial=0.
    const bytes = edited('opset7', (m) => {
      const g = m.graph!;
      const first = g.node!.find((n) => n.op_type === 'Conv')!;
      const out = first.output![0];
      first.output = [`${out}_pre_bn`];
      const c = 8, f32 = (v: number) => new Uint8Array(Float32Array.from({ length: c }, () => v).buffer);
      for (const [name, v] of [['bn_s', 1], ['bn_b', 0], ['bn_m', 0], ['bn_v', 1]] as const) g.initializer!.push({ name, dims: [c], data_type: 1, raw_data: f32(v) });
      g.node!.splice(g.node!.indexOf(first) + 1, 0, { op_type: 'BatchNormalization', name: 'bn_per_element', input: [`${out}_pre_bn`, 'bn_s', 'bn_b', 'bn_m', 'bn_v'], output: [out], attribute: [{ name: 'spatial', type: 2, i: 0 }] });
    });
    const e = refusal(() => modelFromBytes(bytes, 'bn-spatial0.onnx'));
    assert.match(e.message, /bn-spatial0.onnx: BatchNormalization node 'bn_per_element': spatial=0/);
    assert.match(e.hint ?? '', /opset 9 or later/);
  });
  it('an op without a gradient rule on the way to the layer names the op and node', async () => {
    const bytes = edited('opset13', (m) => { const n = m.graph!.node!.find((x) => x.op_type === 'Relu')!; n.op_type = 'Softsign'; n.name = 'act_softsign'; });
    const engine = new Engine();
    try {
      const model = modelFromBytes(bytes, 'softsign.onnx');
      const pm = await engine.prepare(model, [1, 3, 16, 16]);
      const blocked = pm.layers.find((l) => l.blockedBy);
      assert.ok(blocked, 'some layer is blocked by the Softsign');
      assert.equal(blocked!.blockedBy!.opType, 'Softsign');
    } finally { engine.dispose(); }
  });
});
