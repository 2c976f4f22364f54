/** Pooling. Max pools route g to the arg-max; average pools spread g·(1/count) over each window. */
import { UserError } from '../../errors';
import { attrInt, attrInts, nodeLabel } from '../../model/graph';
import { explicitPads } from './conv';
import { GradientRule, linearMapGradient, maskedGrad, product } from '../rule';

/** MaxPool: scatter-add g to the forward's Indices (flattened (n·C+c)·H·W + h·W + w; ties go to the first maximum). */
const maxPool: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node } = ctx;
  if (attrInt(node, 'storage_order', 0) !== 0) throw new UserError(`${nodeLabel(node)}: column-major storage_order is not supported`);
  const indices = node.outputs[1] || ctx.forwardOutput(1);
  const xs = ctx.shape(node.inputs[0]), ys = ctx.shape(node.outputs[0]);
  return [linearMapGradient(ctx, g, { lead: [], inDims: xs, outDims: ys, src: indices, taps: 1 })];
};

/**
 * AveragePool as a fixed linear map: every output averages its window. The divisor follows
 * PyTorch/ONNX Runtime: with count_include_pad the window clipped to the padded extent, else
 * only the in-image taps (ONNX AveragePool spec; ceil_mode windows are clipped the same way).
 */
const averagePool: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node } = ctx;
  const xs = ctx.shape(node.inputs[0]), ys = ctx.shape(node.outputs[0]);
  if (xs.length !== 4) throw new UserError(`${nodeLabel(node)}: only 2-D average pooling is supported`);
  const kernel = attrInts(node, 'kernel_shape')!;
  const strides = attrInts(node, 'strides') ?? [1, 1];
  const dil = attrInts(node, 'dilations') ?? [1, 1];
  const pads = explicitPads(ctx, xs.slice(2), kernel, strides, dil);
  const includePad = attrInt(node, 'count_include_pad', 0) === 1;
  const [H, W] = xs.slice(2), [Ho, Wo] = ys.slice(2);
  const taps = kernel[0] * kernel[1];
  const src = new Int32Array(Ho * Wo * taps);
  const weights = new Float32Array(Ho * Wo * taps);
  for (let oh = 0; oh < Ho; oh++) for (let ow = 0; ow < Wo; ow++) {
    const h0 = oh * strides[0] - pads[0], w0 = ow * strides[1] - pads[1];
    const hEnd = Math.min(h0 + (kernel[0] - 1) * dil[0] + 1, H + pads[2]);
    const wEnd = Math.min(w0 + (kernel[1] - 1) * dil[1] + 1, W + pads[3]);
    const base = (oh * Wo + ow) * taps;
    let inside = 0, padded = 0;
    for (let t = 0; t < taps; t++) {
      const h = h0 + Math.floor(t / kernel[1]) * dil[0], w = w0 + (t % kernel[1]) * dil[1];
      if (h < hEnd && w < wEnd) padded++;
      if (h >= 0 && h < H && w >= 0 && w < W) { src[base + t] = h * W + w; weights[base + t] = 1; inside++; }
    }
    const divisor = includePad ? padded : inside;
    for (let t = 0; t < taps; t++) weights[base + t] /= Math.max(divisor, 1);
  }
  return [linearMapGradient(ctx, g, { lead: xs.slice(0, 2), inDims: [H, W], outDims: [Ho, Wo], src, weights, taps })];
};

/** GlobalAveragePool: every position receives g/(H·W). */
const globalAveragePool: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const xs = ctx.shape(ctx.node.inputs[0]);
  const spatial = product(xs.slice(2));
  const spread = ctx.b.constF(new Float32Array(product(xs)).fill(1 / spatial), xs);
  return [ctx.b.op1('Mul', [g, spread])];
};

/** GlobalMaxPool: g goes to the positions equal to the maximum. */
const globalMaxPool: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const [x] = ctx.node.inputs;
  return [maskedGrad(ctx, ctx.b.op1('Equal', [x, ctx.node.outputs[0]]), g)];
};

export const poolRules: Record<string, GradientRule> = {
  MaxPool: maxPool, AveragePool: averagePool, GlobalAveragePool: globalAveragePool, GlobalMaxPool: globalMaxPool,
};
