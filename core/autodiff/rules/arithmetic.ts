/** Broadcasting binary arithmetic: each input's gradient is summed back to its own shape. */
import { UserError } from '../../errors';
import { nodeLabel } from '../../model/graph';
import { GradientRule, RuleContext, unbroadcast } from '../rule';

type Partials = (ctx: RuleContext, g: string, a: string, b: string, y: string) => [string | undefined, string | undefined];

function binary(partials: Partials): GradientRule {
  return (ctx) => {
    const g = ctx.gradOut[0];
    if (!g) return [];
    const [a, b] = ctx.node.inputs;
    const y = ctx.node.outputs[0];
    const [ga, gb] = partials(ctx, g, a, b, y);
    const outShape = ctx.shape(y);
    return [
      ctx.needs[0] && ga ? unbroadcast(ctx, ga, outShape, ctx.shape(a)) : undefined,
      ctx.needs[1] && gb ? unbroadcast(ctx, gb, outShape, ctx.shape(b)) : undefined,
    ];
  };
}

export const arithmeticRules: Record<string, GradientRule> = {
  // y = a+b: (g, g).  y = a−b: (g, −g).
  Add: binary((_c, g) => [g, g]),
  Sub: binary((ctx, g) => [g, ctx.needs[1] ? ctx.b.op1('Neg', [g]) : undefined]),
  // y = a·b: (g·b, g·a).
  Mul: binary((ctx, g, a, b) => [ctx.needs[0] ? ctx.b.op1('Mul', [g, b]) : undefined, ctx.needs[1] ? ctx.b.op1('Mul', [g, a]) : undefined]),
  // y = a/b: (g/b, −g·y/b).
  Div: binary((ctx, g, _a, b, y) => [
    ctx.needs[0] ? ctx.b.op1('Div', [g, b]) : undefined,
    ctx.needs[1] ? ctx.b.op1('Neg', [ctx.b.op1('Div', [ctx.b.op1('Mul', [g, y]), b])]) : undefined,
  ]),
  // y = aᵉ with a constant exponent: g·e·aᵉ⁻¹. A differentiable exponent is not supported.
  Pow: (ctx) => {
    const g = ctx.gradOut[0];
    if (!g) return [];
    const [a, e] = ctx.node.inputs;
    if (ctx.needs[1]) throw new UserError(`${nodeLabel(ctx.node)}: the exponent depends on the image; only constant exponents are differentiable here`, 'use a constant exponent');
    const { b } = ctx;
    const ev = ctx.value(e);
    const d = ev && ev.length === 1
      ? b.op1('Mul', [b.op1('Pow', [a, b.scalarF(ev[0] - 1)]), b.scalarF(ev[0])])
      : b.op1('Mul', [b.op1('Pow', [a, b.op1('Sub', [b.op1('Cast', [e], { to: { i: 1 } }), b.scalarF(1)])]), b.op1('Cast', [e], { to: { i: 1 } })]);
    return [unbroadcast(ctx, b.op1('Mul', [g, d]), ctx.shape(ctx.node.outputs[0]), ctx.shape(a))];
  },
  // y = Σ xᵢ: each gets g.
  Sum: (ctx) => {
    const g = ctx.gradOut[0];
    if (!g) return [];
    const out = ctx.shape(ctx.node.outputs[0]);
    return ctx.node.inputs.map((x, i) => (ctx.needs[i] ? unbroadcast(ctx, g, out, ctx.shape(x)) : undefined));
  },
  // y = max(a,b) / min(a,b): the gradient goes to the selected operand (ties to the first).
  Max: binary((ctx, g, a, b) => select(ctx, g, ctx.b.op1('GreaterOrEqual', [a, b]))),
  Min: binary((ctx, g, a, b) => select(ctx, g, ctx.b.op1('LessOrEqual', [a, b]))),
  // y = where(c, a, b): (g·[c], g·[¬c]); the condition is not differentiable.
  Where: (ctx) => {
    const g = ctx.gradOut[0];
    if (!g) return [];
    const [c, a, b] = ctx.node.inputs;
    const out = ctx.shape(ctx.node.outputs[0]);
    const zero = ctx.b.scalarF(0);
    return [
      undefined,
      ctx.needs[1] ? unbroadcast(ctx, ctx.b.op1('Where', [c, g, zero]), out, ctx.shape(a)) : undefined,
      ctx.needs[2] ? unbroadcast(ctx, ctx.b.op1('Where', [c, zero, g]), out, ctx.shape(b)) : undefined,
    ];
  },
};

function select(ctx: RuleContext, g: string, firstWins: string): [string, string] {
  const zero = ctx.b.scalarF(0);
  return [ctx.b.op1('Where', [firstWins, g, zero]), ctx.b.op1('Where', [firstWins, zero, g])];
}
