/**
 * Element-wise activations y = f(x): gx = g · f'(x). Each rule is the derivative as written
 * on paper; the forward tensors x (input) and y (output) are batch 1 and broadcast over K.
 */
import { attrFloat } from '../../model/graph';
import { GradientRule, maskedGrad, RuleContext } from '../rule';

type Local = (ctx: RuleContext, g: string, x: string, y: string) => string;

function unary(local: Local): GradientRule {
  return (ctx) => {
    const g = ctx.gradOut[0];
    if (!g || !ctx.needs[0]) return [];
    return [local(ctx, g, ctx.node.inputs[0], ctx.node.outputs[0])];
  };
}

const mul = (ctx: RuleContext, a: string, c: string) => ctx.b.op1('Mul', [a, c]);
const positive = (ctx: RuleContext, x: string) => ctx.b.op1('Greater', [x, ctx.b.scalarF(0)]);

/** Relu: g·[x>0]; guided backpropagation (Springenberg et al. 2015): g·[x>0]·[g>0]. */
const relu: Local = (ctx, g, x) => {
  const { b } = ctx;
  const passed = maskedGrad(ctx, positive(ctx, x), g);
  return ctx.relu === 'guided' ? b.op1('Relu', [passed]) : passed;
};

export const activationRules: Record<string, GradientRule> = {
  Relu: unary(relu),
  // LeakyRelu: x>0 ? g : α·g (ONNX default α = 0.01).
  LeakyRelu: unary((ctx, g, x) => {
    const alpha = attrFloat(ctx.node, 'alpha', 0.01);
    return ctx.b.op1('Where', [positive(ctx, x), g, mul(ctx, g, ctx.b.scalarF(alpha))]);
  }),
  // PRelu: x>0 ? g : slope·g (slope broadcasts like the forward; it is a weight, not differentiated).
  PRelu: (ctx) => {
    const g = ctx.gradOut[0];
    if (!g || !ctx.needs[0]) return [];
    const [x, slope] = ctx.node.inputs;
    return [ctx.b.op1('Where', [positive(ctx, x), g, mul(ctx, g, slope)])];
  },
  // Elu: x>0 ? g : g·(y+α), since d/dx α(eˣ−1) = αeˣ = y+α.
  Elu: unary((ctx, g, x, y) => {
    const alpha = attrFloat(ctx.node, 'alpha', 1);
    return ctx.b.op1('Where', [positive(ctx, x), g, mul(ctx, g, ctx.b.op1('Add', [y, ctx.b.scalarF(alpha)]))]);
  }),
  // Sigmoid: g·y·(1−y).
  Sigmoid: unary((ctx, g, _x, y) => mul(ctx, g, mul(ctx, y, ctx.b.op1('Sub', [ctx.b.scalarF(1), y])))),
  // Tanh: g·(1−y²).
  Tanh: unary((ctx, g, _x, y) => mul(ctx, g, ctx.b.op1('Sub', [ctx.b.scalarF(1), mul(ctx, y, y)]))),
  // HardSigmoid y = max(0, min(1, αx+β)): g·α·[0 < αx+β < 1] (ONNX defaults α=0.2, β=0.5).
  HardSigmoid: unary((ctx, g, x) => {
    const { b } = ctx;
    const alpha = attrFloat(ctx.node, 'alpha', 0.2);
    const beta = attrFloat(ctx.node, 'beta', 0.5);
    const t = b.op1('Add', [mul(ctx, x, b.scalarF(alpha)), b.scalarF(beta)]);
    const inside = b.op1('And', [b.op1('Greater', [t, b.scalarF(0)]), b.op1('Less', [t, b.scalarF(1)])]);
    return b.op1('Where', [inside, mul(ctx, g, b.scalarF(alpha)), b.scalarF(0)]);
  }),
  // HardSwish y = x·max(0, min(1, x/6+½)): derivative 0 for x<−3, 1 for x>3, x/3+½ between.
  HardSwish: unary((ctx, g, x) => {
    const { b } = ctx;
    const mid = b.op1('Add', [mul(ctx, x, b.scalarF(1 / 3)), b.scalarF(0.5)]);
    const upper = b.op1('Where', [b.op1('Greater', [x, b.scalarF(3)]), b.scalarF(1), mid]);
    const d = b.op1('Where', [b.op1('Less', [x, b.scalarF(-3)]), b.scalarF(0), upper]);
    return mul(ctx, g, d);
  }),
  // Clip: g·[min < x < max] (strict, like PyTorch's hardtanh backward). Clip to [0, ·] is a ReLU
  // for guided backpropagation too.
  Clip: (ctx) => {
    const g = ctx.gradOut[0];
    if (!g || !ctx.needs[0]) return [];
    const { b, node } = ctx;
    const x = node.inputs[0];
    const lo = node.inputs[1] ? ctx.value(node.inputs[1])?.[0] : node.attrs.has('min') ? attrFloat(node, 'min', 0) : undefined;
    const hi = node.inputs[2] ? ctx.value(node.inputs[2])?.[0] : node.attrs.has('max') ? attrFloat(node, 'max', 0) : undefined;
    let mask: string | undefined;
    const and = (m: string) => (mask = mask ? b.op1('And', [mask, m]) : m);
    if (node.inputs[1] || lo !== undefined) and(b.op1('Greater', [x, lo !== undefined ? b.scalarF(lo) : node.inputs[1]]));
    if (node.inputs[2] || hi !== undefined) and(b.op1('Less', [x, hi !== undefined ? b.scalarF(hi) : node.inputs[2]]));
    let gx = mask ? maskedGrad(ctx, mask, g) : g;
    if (ctx.relu === 'guided' && lo === 0) gx = b.op1('Relu', [gx]);
    return [gx];
  },
  // Softplus y = log(1+eˣ): g·σ(x).
  Softplus: unary((ctx, g, x) => mul(ctx, g, ctx.b.op1('Sigmoid', [x]))),
  // Erf: g·(2/√π)·exp(−x²).
  Erf: unary((ctx, g, x) => {
    const { b } = ctx;
    const e = b.op1('Exp', [b.op1('Neg', [mul(ctx, x, x)])]);
    return mul(ctx, g, mul(ctx, e, b.scalarF(2 / Math.sqrt(Math.PI))));
  }),
  // Exp: g·y.  Log: g/x.  Neg: −g.  Abs: g·sign(x).  Reciprocal: −g·y².  Sqrt: g/(2y).
  Exp: unary((ctx, g, _x, y) => mul(ctx, g, y)),
  Log: unary((ctx, g, x) => ctx.b.op1('Div', [g, x])),
  Neg: unary((ctx, g) => ctx.b.op1('Neg', [g])),
  Abs: unary((ctx, g, x) => mul(ctx, g, ctx.b.op1('Sign', [x]))),
  Reciprocal: unary((ctx, g, _x, y) => ctx.b.op1('Neg', [mul(ctx, g, mul(ctx, y, y))])),
  Sqrt: unary((ctx, g, _x, y) => ctx.b.op1('Div', [g, mul(ctx, y, ctx.b.scalarF(2))])),
  // Identity-like ops pass the gradient through (Dropout is the identity at inference; Cast
  // between float types keeps values).
  Identity: unary((_ctx, g) => g),
  Dropout: unary((_ctx, g) => g),
  Cast: unary((_ctx, g) => g),
};
