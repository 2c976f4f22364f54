/** Normalization layers at inference. */
import { attrFloat, attrInt } from '../../model/graph';
import { GradientRule, RuleContext, gradAxis } from '../rule';

/** BatchNormalization (inference): y = s·(x−μ)/√(σ²+ε) + B, so gx = g·s/√(σ²+ε) per channel. */
const batchNorm: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { b, node } = ctx;
  const [x, scale, , , variance] = node.inputs;
  const rank = ctx.shape(x).length;
  const eps = attrFloat(node, 'epsilon', 1e-5);
  const factor = b.op1('Div', [scale, b.op1('Sqrt', [b.op1('Add', [variance, b.scalarF(eps)])])]);
  const perChannel = b.op1('Reshape', [factor, b.constI64([-1, ...new Array(rank - 2).fill(1)])]);
  return [b.op1('Mul', [g, perChannel])];
};

/**
 * Normalization over `axes` of x followed by an affine map: x̂ = (x−mean)/√(var+ε), y = x̂·s + B.
 * gx = (1/√(var+ε))·(ĝ − mean(ĝ) − x̂·mean(ĝ·x̂)) with ĝ = g·s, means over the normalized axes
 * (the standard layer-norm backward; derived from the chain rule, checked against finite differences).
 */
function normalizedGrad(ctx: RuleContext, g: string, x: string, scaleB: string, axes: number[], eps: number): string {
  const { b } = ctx;
  const fwdAxes = b.constI64(axes);
  const mean = b.op1('ReduceMean', [x, fwdAxes], { keepdims: { i: 1 } });
  const centered = b.op1('Sub', [x, mean]);
  const variance = b.op1('ReduceMean', [b.op1('Mul', [centered, centered]), fwdAxes], { keepdims: { i: 1 } });
  const invStd = b.op1('Reciprocal', [b.op1('Sqrt', [b.op1('Add', [variance, b.scalarF(eps)])])]);
  const xhat = b.op1('Mul', [centered, invStd]);
  const gh = b.op1('Mul', [g, scaleB]);
  const gAxes = b.constI64(axes.map((a) => a + 1));
  const meanG = b.op1('ReduceMean', [gh, gAxes], { keepdims: { i: 1 } });
  const meanGX = b.op1('ReduceMean', [b.op1('Mul', [gh, xhat]), gAxes], { keepdims: { i: 1 } });
  const inner = b.op1('Sub', [b.op1('Sub', [gh, meanG]), b.op1('Mul', [xhat, meanGX])]);
  return b.op1('Mul', [inner, invStd]);
}

/** LayerNormalization(axis): normalizes over axes [axis, rank). */
const layerNorm: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node } = ctx;
  const [x, scale] = node.inputs;
  const rank = ctx.shape(x).length;
  const axis = gradAxis(attrInt(node, 'axis', -1), rank) - 1;
  const axes = Array.from({ length: rank - axis }, (_, i) => axis + i);
  return [normalizedGrad(ctx, g, x, scale, axes, attrFloat(node, 'epsilon', 1e-5))];
};

/** InstanceNormalization: normalizes each channel over the spatial axes; scale is per channel. */
const instanceNorm: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node, b } = ctx;
  const [x, scale] = node.inputs;
  const rank = ctx.shape(x).length;
  const perChannel = b.op1('Reshape', [scale, b.constI64([-1, ...new Array(rank - 2).fill(1)])]);
  const axes = Array.from({ length: rank - 2 }, (_, i) => i + 2);
  return [normalizedGrad(ctx, g, x, perChannel, axes, attrFloat(node, 'epsilon', 1e-5))];
};

export const normalizationRules: Record<string, GradientRule> = {
  BatchNormalization: batchNorm, LayerNormalization: layerNorm, InstanceNormalization: instanceNorm,
};
