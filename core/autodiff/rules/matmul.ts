/** Matrix products. For Y = A·B: gA = g·Bᵀ and gB = Aᵀ·g, each summed back over broadcast batch dims. */
import { UserError } from '../../errors';
import { attrFloat, attrInt, nodeLabel } from '../../model/graph';
import { GradientRule, RuleContext, unbroadcast } from '../rule';

/** Transposes the last two axes of a tensor of the given rank. */
function swapLast(ctx: RuleContext, t: string, rank: number): string {
  const perm = Array.from({ length: rank }, (_, i) => i);
  [perm[rank - 2], perm[rank - 1]] = [perm[rank - 1], perm[rank - 2]];
  return ctx.b.op1('Transpose', [t], { perm: { ints: perm } });
}

const matmul: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g) return [];
  const [a, bT] = ctx.node.inputs;
  const as = ctx.shape(a), bs = ctx.shape(bT), ys = ctx.shape(ctx.node.outputs[0]);
  if (as.length < 2 || bs.length < 2) throw new UserError(`${nodeLabel(ctx.node)}: MatMul with a 1-D operand is not supported`, 'reshape the operand to 2-D before the MatMul');
  const { b } = ctx;
  // The gradient has one extra leading (seed) axis; the broadcast shape of g·Bᵀ is ys[..−1]+[as[−1]].
  const gaFull = ctx.needs[0] ? b.op1('MatMul', [g, swapLast(ctx, bT, bs.length)]) : undefined;
  const gbFull = ctx.needs[1] ? b.op1('MatMul', [swapLast(ctx, a, as.length), g]) : undefined;
  const aFrom = [...ys.slice(0, -1), as[as.length - 1]];
  const bFrom = [...ys.slice(0, -2), bs[bs.length - 2], ys[ys.length - 1]];
  return [
    gaFull ? unbroadcast(ctx, gaFull, aFrom, as) : undefined,
    gbFull ? unbroadcast(ctx, gbFull, bFrom, bs) : undefined,
  ];
};

/** Gemm Y = α·A'·B' + β·C with A' = transA ? Aᵀ : A (likewise B'). */
const gemm: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g) return [];
  const { node, b } = ctx;
  const [a, bb, c] = node.inputs;
  const alpha = attrFloat(node, 'alpha', 1), beta = attrFloat(node, 'beta', 1);
  const transA = attrInt(node, 'transA', 0), transB = attrInt(node, 'transB', 0);
  const scaled = alpha === 1 ? g : b.op1('Mul', [g, b.scalarF(alpha)]);
  let ga: string | undefined, gb: string | undefined, gc: string | undefined;
  if (ctx.needs[0]) {
    // gA' = αg·B'ᵀ; B'ᵀ = transB ? B : Bᵀ.
    const bPrimeT = transB ? bb : b.op1('Transpose', [bb], { perm: { ints: [1, 0] } });
    const gaPrime = b.op1('MatMul', [scaled, bPrimeT]);
    ga = transA ? b.op1('Transpose', [gaPrime], { perm: { ints: [0, 2, 1] } }) : gaPrime;
  }
  if (ctx.needs[1]) {
    // gB' = A'ᵀ·αg; A'ᵀ = transA ? A : Aᵀ.
    const aPrimeT = transA ? a : b.op1('Transpose', [a], { perm: { ints: [1, 0] } });
    const gbPrime = b.op1('MatMul', [aPrimeT, scaled]);
    gb = transB ? b.op1('Transpose', [gbPrime], { perm: { ints: [0, 2, 1] } }) : gbPrime;
  }
  if (c && ctx.needs[2]) {
    gc = unbroadcast(ctx, beta === 1 ? g : b.op1('Mul', [g, b.scalarF(beta)]), ctx.shape(node.outputs[0]), ctx.shape(c));
  }
  return [ga, gb, gc];
};

export const matmulRules: Record<string, GradientRule> = { MatMul: matmul, Gemm: gemm };
