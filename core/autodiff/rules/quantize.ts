/**
 * Quantized (QDQ) models: QuantizeLinear rounds a float tensor to int8/uint8, DequantizeLinear
 * maps it back (ONNX Operators.md, opset 13: y = saturate(round(x / s) + zp), x' = (q − zp)·s,
 * per tensor or per `axis`). Rounding has zero derivative almost everywhere, so gradients use the
 * straight-through estimator (Bengio, Léonard & Courville 2013, "Estimating or propagating
 * gradients through stochastic neurons for conditional computation"), clipped to the integer
 * range as in quantization-aware training: d round(u)/du := 1 inside it, 0 where it saturates.
 * Split over the two ops so the pair composes to that rule:
 *   QuantizeLinear   ∂q/∂x := [lo ≤ x/s + zp ≤ hi] / s
 *   DequantizeLinear ∂x'/∂q = s
 * The integer tensor between them carries a float gradient; it is never a map layer.
 */
import { UserError } from '../../errors';
import { nodeLabel } from '../../model/graph';
import { GradientRule, maskedGrad, RuleContext } from '../rule';

/** The scale (or zero point) shaped to broadcast against the forward tensor along `axis`. */
function alongAxis(ctx: RuleContext, t: string, xRank: number): string {
  const dims = ctx.shape(t);
  if (dims.length === 0 || (dims.length === 1 && dims[0] === 1)) return t;
  if (dims.length !== 1) throw new UserError(`${nodeLabel(ctx.node)}: blocked quantization (scale of shape [${dims.join(',')}]) has no gradient rule`, 'export with per-tensor or per-channel quantization');
  let axis = Number(ctx.node.attrs.get('axis') ?? 1);
  if (axis < 0) axis += xRank;
  const shape = Array.from({ length: xRank - axis }, (_, i) => (i === 0 ? dims[0] : 1));
  return ctx.b.op1('Reshape', [t, ctx.b.constI64(shape)]);
}

const quantizeLinear: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { b, node } = ctx;
  const [x, scale, zp] = node.inputs;
  const rank = ctx.shape(x).length;
  const s = alongAxis(ctx, scale, rank);
  let u = b.op1('Div', [x, s]);
  if (zp) u = b.op1('Add', [u, b.op1('Cast', [alongAxis(ctx, zp, rank)], { to: { i: 1 } })]);
  // Inside the integer range exactly where the forward rounded rather than saturated: |u − q| ≤ ½
  // (whatever the integer type). The 1e-3 allows for the runtime's own float division.
  const q = b.op1('Cast', [node.outputs[0]], { to: { i: 1 } });
  const inside = b.op1('LessOrEqual', [b.op1('Abs', [b.op1('Sub', [u, q])]), b.scalarF(0.5 + 1e-3)]);
  return [b.op1('Div', [maskedGrad(ctx, inside, g), s])];
};

const dequantizeLinear: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const [q, scale] = ctx.node.inputs;
  return [ctx.b.op1('Mul', [g, alongAxis(ctx, scale, ctx.shape(q).length)])];
};

export const quantizeRules: Record<string, GradientRule> = { QuantizeLinear: quantizeLinear, DequantizeLinear: dequantizeLinear };
