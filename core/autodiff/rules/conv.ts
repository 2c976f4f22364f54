/**
 * Conv: the input gradient of y = conv(x, W) is the transposed convolution of g with the same
 * W, strides, pads, dilations and groups (ONNX ConvTranspose); at stride 1 it is emitted as the
 * equivalent plain Conv with the flipped kernel. `output_padding` restores the
 * exact input size; `output_shape` is never used (the runtime recomputes pads from it and is
 * wrong for asymmetric pads — measured in the feasibility study).
 */
import { UserError } from '../../errors';
import { attrInt, attrInts, attrString, nodeLabel } from '../../model/graph';
import { A } from '../builder';
import { GradientRule, RuleContext, reshapeGrad } from '../rule';

/** Explicit begin/end pads, resolving auto_pad per the ONNX Conv spec. */
export function explicitPads(ctx: RuleContext, inSpatial: number[], kernel: number[], strides: number[], dilations: number[]): number[] {
  const n = inSpatial.length;
  const autoPad = attrString(ctx.node, 'auto_pad', 'NOTSET');
  if (autoPad === 'NOTSET') return attrInts(ctx.node, 'pads') ?? new Array(2 * n).fill(0);
  if (autoPad === 'VALID') return new Array(2 * n).fill(0);
  const begin: number[] = [], end: number[] = [];
  for (let i = 0; i < n; i++) {
    const out = Math.ceil(inSpatial[i] / strides[i]);
    const total = Math.max(0, (out - 1) * strides[i] + (kernel[i] - 1) * dilations[i] + 1 - inSpatial[i]);
    const small = Math.floor(total / 2);
    begin.push(autoPad === 'SAME_UPPER' ? small : total - small);
    end.push(autoPad === 'SAME_UPPER' ? total - small : small);
  }
  return [...begin, ...end];
}

const conv: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  const { node, b } = ctx;
  const [x, w] = node.inputs;
  if (ctx.needs[1] || (node.inputs[2] && ctx.needs[2])) {
    throw new UserError(`${nodeLabel(node)}: its weights depend on the image`, 'only convolutions with constant weights are differentiable here');
  }
  if (!g || !ctx.needs[0]) return [];
  const xs = ctx.shape(x), ws = ctx.shape(w), ys = ctx.shape(node.outputs[0]);
  if (xs[0] !== 1) throw new UserError(`${nodeLabel(node)}: batch ${xs[0]} — the forward must run at batch 1`);
  const n = xs.length - 2;
  const kernel = ws.slice(2);
  const stridesA = attrInts(node, 'strides') ?? new Array(n).fill(1);
  const dil = attrInts(node, 'dilations') ?? new Array(n).fill(1);
  const pads = explicitPads(ctx, xs.slice(2), kernel, stridesA, dil);
  const group = attrInt(node, 'group', 1);
  // ConvTranspose output size = s·(in−1) + op + ((k−1)·d + 1) − pad_begin − pad_end (ONNX spec).
  const outputPadding = xs.slice(2).map((size, i) => size - (stridesA[i] * (ys[2 + i] - 1) + (kernel[i] - 1) * dil[i] + 1 - pads[i] - pads[i + n]));
  if (outputPadding.some((p, i) => p < 0 || p >= Math.max(stridesA[i], dil[i]))) {
    throw new UserError(`${nodeLabel(node)}: cannot invert its geometry (output_padding ${outputPadding.join(',')})`);
  }
  const gy = b.op1('Reshape', [g, b.constI64([-1, ...ys.slice(1)])]);
  const flippedPads = pads.map((p, i) => (kernel[i % n] - 1) * dil[i % n] - p);
  if (stridesA.every((s) => s === 1) && flippedPads.every((p) => p >= 0)) {
    // Stride 1: the transposed convolution equals a plain Conv with the flipped, in/out-swapped
    // kernel and pads (k−1)·d − p (the adjoint of a correlation is the correlation with the
    // reversed kernel); onnxruntime's Conv is much faster than its ConvTranspose (measured in
    // test/bench). The kernel rearrangement is constant, so the runtime folds it once.
    const gx = b.op1('Conv', [gy, flippedKernel(ctx, w, ws, group)], {
      pads: A.ints(flippedPads), dilations: A.ints(dil), group: A.i(group), kernel_shape: A.ints(kernel), strides: A.ints(stridesA),
    });
    return [reshapeGrad(ctx, gx, xs)];
  }
  const gx = b.op1('ConvTranspose', [gy, w], {
    strides: A.ints(stridesA), pads: A.ints(pads), dilations: A.ints(dil), group: A.i(group),
    kernel_shape: A.ints(kernel), output_padding: A.ints(outputPadding),
  });
  return [reshapeGrad(ctx, gx, xs)];
};

/**
 * Conv weights [Cout, Cin/g, k…] → the kernel of the adjoint Conv, [Cin, Cout/g, k…]: within each
 * group swap the in/out axes, then reverse every spatial axis (Slice with step −1).
 */
function flippedKernel(ctx: RuleContext, w: string, ws: number[], group: number): string {
  const { b } = ctx;
  const [cout, cinG, ...k] = ws;
  const spatial = k.map((_, i) => i + 3);
  const grouped = b.op1('Reshape', [w, b.constI64([group, cout / group, cinG, ...k])]);
  const swapped = b.op1('Transpose', [grouped], { perm: A.ints([0, 2, 1, ...spatial]) });
  const kernel = b.op1('Reshape', [swapped, b.constI64([group * cinG, cout / group, ...k])]);
  const flipAxes = k.map((_, i) => i + 2).filter((_, i) => k[i] > 1);
  if (!flipAxes.length) return kernel;
  const big = 2 ** 62;
  return b.op1('Slice', [kernel, b.constI64(flipAxes.map(() => -1)), b.constI64(flipAxes.map(() => -big)), b.constI64(flipAxes), b.constI64(flipAxes.map(() => -1))]);
}

/**
 * ConvTranspose is the adjoint of Conv with the same weights, so its input gradient is a Conv of
 * g with W ([Cin, Cout/group, k…] is exactly Conv's [out, in/group, k…] layout for that direction).
 */
const convTranspose: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  const { node, b } = ctx;
  const [x, w] = node.inputs;
  if (ctx.needs[1] || (node.inputs[2] && ctx.needs[2])) {
    throw new UserError(`${nodeLabel(node)}: its weights depend on the image`, 'only constant weights are differentiable here');
  }
  if (!g || !ctx.needs[0]) return [];
  if (node.attrs.has('output_shape') || attrString(node, 'auto_pad', 'NOTSET') !== 'NOTSET') {
    throw new UserError(`${nodeLabel(node)}: ConvTranspose with output_shape or auto_pad has no gradient rule`, 're-export with explicit pads');
  }
  const xs = ctx.shape(x), ys = ctx.shape(node.outputs[0]), ws = ctx.shape(w);
  const n = xs.length - 2;
  const gy = b.op1('Reshape', [g, b.constI64([-1, ...ys.slice(1)])]);
  const gx = b.op1('Conv', [gy, w], {
    strides: A.ints(attrInts(node, 'strides') ?? new Array(n).fill(1)),
    pads: A.ints(attrInts(node, 'pads') ?? new Array(2 * n).fill(0)),
    dilations: A.ints(attrInts(node, 'dilations') ?? new Array(n).fill(1)),
    group: A.i(attrInt(node, 'group', 1)),
    kernel_shape: A.ints(ws.slice(2)),
  });
  return [reshapeGrad(ctx, gx, xs)];
};

export const convRules: Record<string, GradientRule> = { Conv: conv, ConvTranspose: convTranspose };
