/**
 * Seed chunk sizing (core/engine/budget.ts) on a graph small enough to count by hand:
 * x[1,3,8,8] → Conv → a[1,4,8,8] → GlobalAveragePool → g[1,4,1,1] → Flatten → f[1,4] → MatMul → m[1,6] → Add → z[1,6].
 */
import { strict as assert } from 'node:assert';
import { Engine } from '../../../core/engine/engine';
import { bytesPerSeed, liveGradientValues, RUN_BYTES, seedChunkSize } from '../../../core/engine/budget';
import { modelFromBytes } from '../../../core/model/load';
import { encodeModelProto, TensorType } from '../../../core/model/proto';
import { floatTensor } from '../../../core/model/tensor';
import { UserError } from '../../../core/errors';

function model(): ReturnType<typeof modelFromBytes> {
  const vi = (name: string, dims: number[]) => ({ name, type: { tensor_type: { elem_type: TensorType.FLOAT, shape: { dim: dims.map((d) => ({ dim_value: d })) } } } });
  return modelFromBytes(encodeModelProto({
    ir_version: 8, opset_import: [{ domain: '', version: 18 }],
    graph: {
      name: 'chain',
      node: [
        { op_type: 'Conv', name: 'conv', input: ['x', 'k'], output: ['a'], attribute: [{ name: 'pads', type: 7, ints: [1, 1, 1, 1] }] as never },
        { op_type: 'GlobalAveragePool', name: 'gap', input: ['a'], output: ['g'] },
        { op_type: 'Flatten', name: 'flat', input: ['g'], output: ['f'] },
        { op_type: 'MatMul', name: 'fc', input: ['f', 'w'], output: ['m'] },
        { op_type: 'Add', name: 'bias', input: ['m', 'b'], output: ['z'] },
      ],
      initializer: [floatTensor('k', [4, 3, 3, 3], new Float32Array(108).fill(0.1)), floatTensor('w', [4, 6], new Float32Array(24).fill(0.1)), floatTensor('b', [6], new Float32Array(6))],
      input: [vi('x', [1, 3, 8, 8])], output: [vi('z', [1, 6])],
    },
  }), 'chain.onnx');
}

describe('seed chunk size from the live gradients', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('counts the peak of live gradients per seed by hand', async () => {
    const pm = await engine.prepare(model(), [1, 3, 8, 8]);
    // Reverse order, live + new input gradients + one output-sized temporary at each step:
    // Add 6+6+6, MatMul 6+4+6, Flatten 4+4+4, GAP 4+256+4 = 264 (the peak); plus the returned a (256).
    assert.equal(liveGradientValues(pm, ['a']), 264 + 256);
    assert.equal(bytesPerSeed(pm, ['a']), Math.ceil(520 * 4 * 1.5));
    assert.equal(seedChunkSize(pm, ['a'], 100 * bytesPerSeed(pm, ['a'])), 100);
  });

  it('a large budget still runs at most RUN_BYTES of seed rows per run, and never fewer than three', async () => {
    const pm = await engine.prepare(model(), [1, 3, 8, 8]);
    const per = bytesPerSeed(pm, ['a']);
    assert.equal(seedChunkSize(pm, ['a'], 8 * RUN_BYTES), Math.floor(RUN_BYTES / per));
    assert.equal(seedChunkSize(pm, ['a'], RUN_BYTES / 2), Math.floor(RUN_BYTES / 2 / per), 'a budget below the cap is the bound');
  });

  it('a budget below three seed rows is a user error naming the layer', async () => {
    const pm = await engine.prepare(model(), [1, 3, 8, 8]);
    assert.throws(() => seedChunkSize(pm, ['a'], 2 * bytesPerSeed(pm, ['a'])), (e: unknown) => e instanceof UserError && /'a'/.test(e.message));
  });
});
