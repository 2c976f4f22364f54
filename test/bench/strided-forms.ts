/**
 * The strided input gradients of the ResNet-18 sweep as single ops, against the work they
 * contain: onnxruntime's ConvTranspose (3×3, stride 2, the gradient of layer3.0.conv1 and
 * layer4.0.conv1 for 127 seeds), the 1×1 Conv that does only its GEMM (the columns before
 * col2im), and a stride-1 3×3 Conv with the same multiply-adds, as the sweep's own Convs run
 * (NCHWc), and the interleave of four phase outputs that the polyphase form ends with. Arena on and spinning off, as the sweep's backward session runs (core/engine/runtime.ts).
 * Says how far the strided nodes sit under the dense rate, which bounds what any other form of
 * them can save.
 *
 * Usage: npx tsx test/bench/strided-forms.ts [seeds] [runs]
 */
import * as ort from 'onnxruntime-node';
import { encodeModelProto, NodeProto, TensorType } from '../../core/model/proto';
import { floatTensor } from '../../core/model/tensor';
import { mulberry32 } from '../../core/metrics/random';

const A = {
  ints: (name: string, ints: number[]) => ({ name, type: 7, ints }),
};

function graph(name: string, node: NodeProto, wDims: number[] | undefined, inDims: number[]): Uint8Array {
  const rand = mulberry32(1);
  const n = (wDims ?? []).reduce((a, b) => a * b, 1);
  const vi = (v: string, dims: number[]) => ({ name: v, type: { tensor_type: { elem_type: TensorType.FLOAT, shape: { dim: dims.map((d) => ({ dim_value: d })) } } } });
  return encodeModelProto({
    ir_version: 8, opset_import: [{ domain: '', version: 18 }],
    graph: {
      name,
      // The ReduceSum keeps the output inside the runtime: only one float comes back.
      node: [node, { op_type: 'ReduceSum', input: ['y'], output: ['s'], attribute: [{ name: 'keepdims', type: 2, i: 0 }] as never }],
      initializer: wDims ? [floatTensor('w', wDims, Float32Array.from({ length: n }, () => rand() - 0.5))] : [],
      input: [vi('g', inDims)], output: [vi('s', [])],
    },
  });
}

async function time(bytes: Uint8Array, inDims: number[], runs: number): Promise<number> {
  const s = await ort.InferenceSession.create(bytes, {
    intraOpNumThreads: 2, interOpNumThreads: 1, graphOptimizationLevel: 'all', enableCpuMemArena: true,
    extra: { session: { intra_op: { allow_spinning: '0' } } },
  });
  const rand = mulberry32(2);
  const g = new ort.Tensor('float32', Float32Array.from({ length: inDims.reduce((a, b) => a * b, 1) }, () => rand() - 0.5), inDims);
  for (let i = 0; i < 2; i++) await s.run({ g });
  const t: number[] = [];
  for (let i = 0; i < runs; i++) { const t0 = performance.now(); await s.run({ g }); t.push(performance.now() - t0); }
  await s.release();
  return t.sort((a, b) => a - b)[t.length >> 1];
}

async function main(): Promise<void> {
  const k = Number(process.argv[2] ?? 127), runs = Number(process.argv[3] ?? 7);
  for (const [what, cout, cin, size] of [['layer3.0.conv1', 256, 128, 14], ['layer4.0.conv1', 512, 256, 7]] as const) {
    const inDims = [k, cout, size, size];
    const gflop = (2 * k * cout * cin * 9 * size * size) / 1e9;
    const forms: [string, NodeProto, number[] | undefined, number[]?][] = [
      ['ConvTranspose 3×3 stride 2', { op_type: 'ConvTranspose', input: ['g', 'w'], output: ['y'], attribute: [A.ints('strides', [2, 2]), A.ints('pads', [1, 1, 1, 1]), A.ints('output_padding', [1, 1]), A.ints('kernel_shape', [3, 3])] as never }, [cout, cin, 3, 3]],
      ['its GEMM alone (1×1 Conv to the columns)', { op_type: 'Conv', input: ['g', 'w'], output: ['y'], attribute: [A.ints('kernel_shape', [1, 1])] as never }, [cin * 9, cout, 1, 1]],
      ['stride-1 3×3 Conv, same MACs', { op_type: 'Conv', input: ['g', 'w'], output: ['y'], attribute: [A.ints('kernel_shape', [3, 3]), A.ints('pads', [1, 1, 1, 1])] as never }, [cin, cout, 3, 3]],
      // The polyphase form's last step: its four phase outputs interleaved into the input grid.
      ['interleaving 4 phases (DepthToSpace 2)', { op_type: 'DepthToSpace', input: ['g'], output: ['y'], attribute: [{ name: 'blocksize', type: 2, i: 2 }] as never }, undefined, [k, 4 * cin, size, size]],
    ];
    for (const [form, node, wDims, dims = inDims] of forms) {
      const ms = await time(graph(form, node, wDims, dims), dims, runs);
      console.log(`${what} ${k} seeds  ${form.padEnd(42)} ${ms.toFixed(1).padStart(7)} ms${wDims ? `  ${(gflop / (ms / 1e3)).toFixed(0).padStart(4)} GFLOP/s` : ''}`);
    }
  }
}

main().catch((e) => { console.error(e); process.exit(1); });
