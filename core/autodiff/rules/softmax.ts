/** Softmax family along one axis (opset ≥ 13 semantics; older models are upgraded first). */
import { attrInt } from '../../model/graph';
import { GradientRule, gradAxis } from '../rule';

/** Softmax: gx = y ⊙ (g − Σ_axis g⊙y). */
const softmax: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { b, node } = ctx;
  const y = node.outputs[0];
  const axis = b.constI64([gradAxis(attrInt(node, 'axis', -1), ctx.shape(y).length)]);
  const dot = b.op1('ReduceSum', [b.op1('Mul', [g, y]), axis], { keepdims: { i: 1 } });
  return [b.op1('Mul', [y, b.op1('Sub', [g, dot])])];
};

/** LogSoftmax: gx = g − exp(y) ⊙ Σ_axis g. */
const logSoftmax: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { b, node } = ctx;
  const y = node.outputs[0];
  const axis = b.constI64([gradAxis(attrInt(node, 'axis', -1), ctx.shape(y).length)]);
  const total = b.op1('ReduceSum', [g, axis], { keepdims: { i: 1 } });
  return [b.op1('Sub', [g, b.op1('Mul', [b.op1('Exp', [y]), total])])];
};

export const softmaxRules: Record<string, GradientRule> = { Softmax: softmax, LogSoftmax: logSoftmax };
