/**
 * The contract between the backward-graph builder and the per-op rules.
 *
 * Every gradient tensor carries one extra leading axis, the seed axis K, in front of the
 * forward tensor's own shape: a forward tensor of shape S has gradients of shape [K, ...S].
 * The forward runs once (batch 1) and broadcasts against the K seeds, so one run yields the
 * gradients of K different scalar functions of the scores (DESIGN §3). K stays dynamic in the
 * graph (reshapes use -1 for it), so one compiled session serves every chunk size.
 */
import { GraphNode } from '../model/graph';
import { GraphBuilder } from './builder';

export interface RuleContext {
  node: GraphNode;
  b: GraphBuilder;
  /** Concrete forward shape (from the shape probe) of a tensor. */
  shape(name: string): number[];
  /** Values of a tensor that does not depend on the image (initializer, Constant, shape arithmetic). */
  value(name: string): number[] | undefined;
  /** Gradient names for each node output ([K, ...outShape]); undefined where no gradient flows. */
  gradOut: (string | undefined)[];
  /** Whether each input needs a gradient (it lies on a path from a requested layer). */
  needs: boolean[];
  /** 'guided' replaces every ReLU's backward by g·[a>0]·[g>0] (guided backpropagation). */
  relu: 'standard' | 'guided';
  /** Asks the forward node to expose its output slot `index` (e.g. MaxPool Indices); returns its name. */
  forwardOutput(index: number): string;
  /** An int64 [1] tensor holding K at run time. */
  seedCount: string;
}

/** Returns the gradient for each input of the node (undefined where none is needed or it is zero). */
export type GradientRule = (ctx: RuleContext) => (string | undefined)[];

/** Position of forward axis `axis` (maybe negative) of a rank-`rank` tensor in its gradient. */
export function gradAxis(axis: number, rank: number): number {
  return (axis < 0 ? axis + rank : axis) + 1;
}

/** Reshapes a gradient to [K, ...shape]. */
/**
 * g where the boolean mask holds, 0 elsewhere, as g · float(mask): the same values as
 * Where(mask, g, 0) for finite g, but onnxruntime's broadcasting Where over the K seeds is
 * single-threaded and ran 2.7–5× slower than Mul by the batch-1 float mask (test/bench, 3 Dec 2026).
 */
export function maskedGrad(ctx: RuleContext, mask: string, g: string): string {
  return ctx.b.op1('Mul', [g, ctx.b.op1('Cast', [mask], { to: { i: 1 } })]);
}

export function reshapeGrad(ctx: RuleContext, g: string, shape: number[]): string {
  return ctx.b.op1('Reshape', [g, ctx.b.constI64([-1, ...shape])]);
}

/** A zero gradient [K, ...shape]. */
export function zerosGrad(ctx: RuleContext, shape: number[]): string {
  const dims = ctx.b.op1('Concat', [ctx.seedCount, ctx.b.constI64(shape)], { axis: { i: 0 } });
  return ctx.b.op1('ConstantOfShape', [dims], { value: { t: { dims: [1], data_type: 1, raw_data: new Uint8Array(4) } } });
}

/**
 * Sums a gradient of broadcast shape [K, ...from] down to [K, ...to] (numpy broadcasting,
 * ONNX "Broadcasting in ONNX" document): axes that `to` lacks or holds as 1 are summed.
 */
export function unbroadcast(ctx: RuleContext, g: string, from: number[], to: number[]): string {
  const offset = from.length - to.length;
  const axes: number[] = [];
  for (let i = 0; i < from.length; i++) {
    const t = i - offset;
    if (t < 0 || (to[t] === 1 && from[i] !== 1)) axes.push(i + 1);
  }
  let out = g;
  if (axes.length) out = ctx.b.op1('ReduceSum', [g, ctx.b.constI64(axes)], { keepdims: { i: 1 } });
  if (axes.length || offset !== 0) out = reshapeGrad(ctx, out, to);
  return out;
}

/**
 * Gradient of a sparse linear map over the trailing dims of a tensor:
 * y[..., m] = Σ_t w[m,t] · x[..., src[m,t]] for every leading index (the forward's leading
 * dims `lead` are folded into the seed axis). Its adjoint scatters g·w back to src with
 * ScatterND reduction 'add' (ONNX ScatterND, opset 16+), so duplicates accumulate.
 */
export function linearMapGradient(
  ctx: RuleContext, g: string,
  map: { lead: number[]; inDims: number[]; outDims: number[]; src: Int32Array | string; weights?: Float32Array; taps: number },
): string {
  const { b } = ctx;
  const M = map.outDims.reduce((a, c) => a * c, 1);
  const N = map.inDims.reduce((a, c) => a * c, 1);
  const rows = b.op1('Reshape', [g, b.constI64([-1, M])]);
  const cols = b.op1('Transpose', [rows], { perm: { ints: [1, 0] } }); // [M, KL]
  let updates = cols;
  if (map.taps > 1) {
    const tapRows = Int32Array.from({ length: M * map.taps }, (_, j) => Math.floor(j / map.taps));
    updates = b.op1('Gather', [cols, b.constI64(tapRows)], { axis: { i: 0 } });
  }
  if (map.weights) updates = b.op1('Mul', [updates, b.constF(map.weights, [map.weights.length, 1])]);
  const kl = b.op1('Slice', [b.op1('Shape', [cols]), b.constI64([1]), b.constI64([2])]);
  const zeros = b.op1('ConstantOfShape', [b.op1('Concat', [b.constI64([N]), kl], { axis: { i: 0 } })], {
    value: { t: { dims: [1], data_type: 1, raw_data: new Uint8Array(4) } },
  });
  // `src` is either a constant index table or a run-time int64 tensor (MaxPool Indices).
  const idx = typeof map.src === 'string' ? b.op1('Reshape', [map.src, b.constI64([-1, 1])]) : b.constI64(map.src, [map.src.length, 1]);
  const scattered = b.op1('ScatterND', [zeros, idx, updates], { reduction: { s: 'add' } });
  const back = b.op1('Transpose', [scattered], { perm: { ints: [1, 0] } });
  return b.op1('Reshape', [back, b.constI64([-1, ...map.lead, ...map.inDims])]);
}

export function product(dims: number[]): number {
  return dims.reduce((a, c) => a * c, 1);
}

/** Row-major strides of a shape. */
export function strides(dims: number[]): number[] {
  const s = new Array(dims.length).fill(1);
  for (let i = dims.length - 2; i >= 0; i--) s[i] = s[i + 1] * dims[i + 1];
  return s;
}
