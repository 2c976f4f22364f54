/** Ops that only move values: reshapes, transposes, broadcasts, tiling, joining and splitting. */
import { attrInt, attrInts } from '../../model/graph';
import { GradientRule, gradAxis, reshapeGrad, unbroadcast, zerosGrad } from '../rule';

/** Reshape/Flatten/Squeeze/Unsqueeze keep the element order: reshape g back. */
const reshapeBack: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  return [reshapeGrad(ctx, g, ctx.shape(ctx.node.inputs[0]))];
};

/** Transpose(perm): g transposed by the inverse permutation, the seed axis kept first. */
const transpose: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const rank = ctx.shape(ctx.node.inputs[0]).length;
  const perm = attrInts(ctx.node, 'perm') ?? Array.from({ length: rank }, (_, i) => rank - 1 - i);
  const inverse = new Array<number>(rank);
  perm.forEach((p, i) => (inverse[p] = i));
  return [ctx.b.op1('Transpose', [g], { perm: { ints: [0, ...inverse.map((i) => i + 1)] } })];
};

/** Expand: the broadcast's adjoint, a sum over the expanded axes. */
const expand: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  return [unbroadcast(ctx, g, ctx.shape(ctx.node.outputs[0]), ctx.shape(ctx.node.inputs[0]))];
};

/** Tile: y index r·sᵢ + j along each axis, so reshape g to [K, r₀, s₀, r₁, s₁, …] and sum the r axes. */
const tile: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const xs = ctx.shape(ctx.node.inputs[0]);
  const reps = ctx.value(ctx.node.inputs[1])!;
  const split = ctx.b.op1('Reshape', [g, ctx.b.constI64([-1, ...xs.flatMap((s, i) => [reps[i], s])])]);
  const axes = xs.map((_, i) => 1 + 2 * i);
  return [ctx.b.op1('ReduceSum', [split, ctx.b.constI64(axes)], { keepdims: { i: 0 } })];
};

/** Concat: split g along the same axis into the inputs' sizes. */
const concat: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g) return [];
  const { node, b } = ctx;
  const rank = ctx.shape(node.outputs[0]).length;
  const axis = gradAxis(attrInt(node, 'axis', 0), rank);
  const sizes = node.inputs.map((x) => ctx.shape(x)[axis - 1]);
  const parts = b.op('Split', [g, b.constI64(sizes)], { axis: { i: axis } }, sizes.length);
  return parts.map((p, i) => (ctx.needs[i] ? p : undefined));
};

/** Split: concatenate the outputs' gradients (zeros where none flows) along the same axis. */
const split: GradientRule = (ctx) => {
  if (!ctx.needs[0] || ctx.gradOut.every((g) => !g)) return [];
  const { node, b } = ctx;
  const rank = ctx.shape(node.inputs[0]).length;
  const axis = gradAxis(attrInt(node, 'axis', 0), rank);
  const parts = node.outputs.map((o, i) => ctx.gradOut[i] ?? zerosGrad(ctx, ctx.shape(o)));
  return [parts.length === 1 ? parts[0] : b.op1('Concat', parts, { axis: { i: axis } })];
};

export const layoutRules: Record<string, GradientRule> = {
  Reshape: reshapeBack, Flatten: reshapeBack, Squeeze: reshapeBack, Unsqueeze: reshapeBack,
  Transpose: transpose, Expand: expand, Tile: tile, Concat: concat, Split: split,
};
