/**
 * Models that take raw uint8 NHWC pixels and preprocess inside the graph (Cast→Div→Sub→Div→
 * Transpose; test-fixtures/variants/uint8_nhwc). Their gradients against PyTorch float64 (at two
 * layers and at the raw pixels) are in export-variants-vs-pytorch.test.ts; here: what a user
 * gets when opening one, and the refusal when the uint8 input does not go through a Cast to float.
 */
import { strict as assert } from 'node:assert';
import { copyFileSync, mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { UserError } from '../../../core/errors';
import { explainMaps } from '../../../core/methods/maps';
import { modelFromBytes } from '../../../core/model/load';
import { decodeModelProto, encodeModelProto, TensorType } from '../../../core/model/proto';
import { openModel } from '../../../core/workflow/open-model';
import { imageInput } from '../../../core/workflow/model-input';
import { FIXTURES } from '../../helpers';

const MODEL = path.join(FIXTURES, 'variants', 'uint8_nhwc', 'model.onnx');
const DEMO = path.join(FIXTURES, 'parts', 'demo');

describe('uint8 NHWC input with preprocessing in the graph', function () {
  this.timeout(60_000);
  const engine = new Engine();
  let dir: string;
  before(() => { dir = mkdtempSync(path.join(tmpdir(), 'ff-u8-')); copyFileSync(MODEL, path.join(dir, 'model.onnx')); });
  after(() => { engine.dispose(); rmSync(dir, { recursive: true, force: true }); });

  it('opens with the raw 0–255 pixel values fed (raw255), NHWC, and explains at a layer and at the pixels', async () => {
    const ctx = await openModel(engine, path.join(dir, 'model.onnx'));
    assert.equal(ctx.pm.model.rawPixelInput, 'uint8');
    assert.equal(ctx.spec.layout, 'NHWC');
    assert.equal(ctx.spec.scale, 1);
    assert.deepEqual(ctx.spec.mean, [0, 0, 0]);
    const cls = readdirSync(DEMO)[0];
    const img = path.join(DEMO, cls, readdirSync(path.join(DEMO, cls))[0]);
    const input = await imageInput(ctx, img);
    assert.equal(input.data.length, 16 * 16 * 3);
    assert.ok(input.data.every((v) => Number.isInteger(v) && v >= 0 && v <= 255), 'integer pixel values 0–255');
    assert.ok(input.data.some((v) => v > 1), 'not scaled to 0–1');
    const maps = await explainMaps(engine, ctx.pm, input.data, [{ kind: 'evidence', fact: 0 }, { kind: 'detail', fact: 0 }], ['block2']);
    const detail = maps.find((m) => m.question.kind === 'detail')!;
    assert.equal(detail.layer, 'input');
    assert.deepEqual([detail.raw.height, detail.raw.width], [16, 16]);
    assert.ok(detail.raw.data.every(Number.isFinite) && detail.raw.data.some((v) => v !== 0), 'a finite, non-zero detail map');
    assert.ok(maps[0].raw.data.every(Number.isFinite));
  });

  it('a uint8 input that feeds anything but a Cast to float is refused with the node and the fix', () => {
    const m = decodeModelProto(readFileSync(MODEL));
    const cast = m.graph!.node!.find((n) => n.op_type === 'Cast')!;
    cast.attribute!.find((a) => a.name === 'to')!.i = TensorType.INT32;
    cast.name = 'to_int';
    assert.throws(() => modelFromBytes(encodeModelProto(m), 'u8-int.onnx'), (e: unknown) => e instanceof UserError
      && /u8-int.onnx: input 'input' is not a float image tensor \(uint8, shape \[1,16,16,3\]\)/.test(e.message)
      && /here it feeds Cast node 'to_int' \(a Cast to another type\): export with x.float\(\) as the first step/.test(e.hint ?? ''), );
  });
});
