/** Reductions over axes (axes from the attribute or, from opset 13/18, the second input). */
import { attrInt, attrInts } from '../../model/graph';
import { GradientRule, RuleContext, maskedGrad, product, reshapeGrad } from '../rule';

function reducedAxes(ctx: RuleContext, rank: number): number[] {
  const { node } = ctx;
  const fromInput = node.inputs[1] ? ctx.value(node.inputs[1]) : undefined;
  const axes = fromInput ?? attrInts(node, 'axes');
  if (!axes || axes.length === 0) {
    // Empty axes: all axes, unless noop_with_empty_axes (then identity).
    return attrInt(node, 'noop_with_empty_axes', 0) ? [] : Array.from({ length: rank }, (_, i) => i);
  }
  return axes.map((a) => (a < 0 ? a + rank : a));
}

/** g with the reduced axes restored as size-1 dims (the keepdims shape). */
function keptGrad(ctx: RuleContext, g: string, xs: number[], axes: number[]): string {
  if (attrInt(ctx.node, 'keepdims', 1) === 1) return g;
  return reshapeGrad(ctx, g, xs.map((d, i) => (axes.includes(i) ? 1 : d)));
}

/** ReduceSum: g broadcast back over the reduced axes. ReduceMean: the same divided by their size. */
function sumLike(mean: boolean): GradientRule {
  return (ctx) => {
    const g = ctx.gradOut[0];
    if (!g || !ctx.needs[0]) return [];
    const xs = ctx.shape(ctx.node.inputs[0]);
    const axes = reducedAxes(ctx, xs.length);
    const n = mean ? product(axes.map((a) => xs[a])) : 1;
    const spread = ctx.b.constF(new Float32Array(product(xs)).fill(1 / n), xs);
    return [ctx.b.op1('Mul', [keptGrad(ctx, g, xs, axes), spread])];
  };
}

/** ReduceMax/ReduceMin: g to the positions equal to the extreme value. */
const extreme: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { b, node } = ctx;
  const x = node.inputs[0];
  const xs = ctx.shape(x);
  const axes = reducedAxes(ctx, xs.length);
  const y = attrInt(node, 'keepdims', 1) === 1 ? node.outputs[0] : b.op1('Reshape', [node.outputs[0], b.constI64(xs.map((d, i) => (axes.includes(i) ? 1 : d)))]);
  return [maskedGrad(ctx, b.op1('Equal', [x, y]), keptGrad(ctx, g, xs, axes))];
};

export const reduceRules: Record<string, GradientRule> = {
  ReduceSum: sumLike(false), ReduceMean: sumLike(true), ReduceMax: extreme, ReduceMin: extreme,
};
