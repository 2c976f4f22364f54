/**
 * Ops whose output elements are fixed combinations of input elements: slicing, gathering,
 * padding, resizing. Each builds its index table from the ONNX spec's formula at plan time
 * (shapes are concrete) and shares one adjoint: scatter-add (rule.ts linearMapGradient).
 */
import { UserError } from '../../errors';
import { attrInt, attrString, nodeLabel } from '../../model/graph';
import { GradientRule, RuleContext, linearMapGradient, product, strides } from '../rule';

/** Calls `visit(outFlat, outIndex)` for every element of a row-major shape. */
function forEachIndex(dims: number[], visit: (flat: number, idx: number[]) => void): void {
  const total = product(dims);
  const idx = new Array(dims.length).fill(0);
  for (let flat = 0; flat < total; flat++) {
    visit(flat, idx);
    for (let a = dims.length - 1; a >= 0; a--) {
      if (++idx[a] < dims[a]) break;
      idx[a] = 0;
    }
  }
}

function needValue(ctx: RuleContext, name: string, what: string): number[] {
  const v = ctx.value(name);
  if (!v) throw new UserError(`${nodeLabel(ctx.node)}: its ${what} depend on the image`, 'only constant or shape-derived indices are differentiable here');
  return v;
}

/** Slice (ONNX spec, opset 13): per axis start/end clamped by the sign of the step. */
const slice: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node, b } = ctx;
  const xs = ctx.shape(node.inputs[0]), ys = ctx.shape(node.outputs[0]);
  const rank = xs.length;
  const starts = needValue(ctx, node.inputs[1], 'starts');
  const axes = node.inputs[3] ? needValue(ctx, node.inputs[3], 'axes') : starts.map((_, i) => i);
  const steps = node.inputs[4] ? needValue(ctx, node.inputs[4], 'steps') : starts.map(() => 1);
  const start = new Array(rank).fill(0), step = new Array(rank).fill(1);
  axes.forEach((a0, i) => {
    const a = a0 < 0 ? a0 + rank : a0;
    const dim = xs[a];
    let s = starts[i] < 0 ? starts[i] + dim : starts[i];
    s = steps[i] > 0 ? Math.min(Math.max(s, 0), dim) : Math.min(Math.max(s, 0), dim - 1);
    start[a] = s;
    step[a] = steps[i];
  });
  if (step.every((s) => s === 1)) {
    // Contiguous slice: its adjoint is zero padding back to the input shape.
    const pads = [0, ...start, 0, ...xs.map((d, a) => d - start[a] - ys[a])];
    return [b.op1('Pad', [g, b.constI64(pads)])];
  }
  const st = strides(xs);
  const src = new Int32Array(product(ys));
  forEachIndex(ys, (flat, idx) => {
    let s = 0;
    for (let a = 0; a < rank; a++) s += (start[a] + idx[a] * step[a]) * st[a];
    src[flat] = s;
  });
  return [linearMapGradient(ctx, g, { lead: [], inDims: xs, outDims: ys, src, taps: 1 })];
};

/** Gather(axis): y[pre, j…, post] = x[pre, indices[j…], post]; repeated indices accumulate. */
const gather: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node } = ctx;
  const xs = ctx.shape(node.inputs[0]), ys = ctx.shape(node.outputs[0]);
  const indices = needValue(ctx, node.inputs[1], 'indices');
  const q = ctx.shape(node.inputs[1]).length;
  const axis = attrInt(node, 'axis', 0) < 0 ? attrInt(node, 'axis', 0) + xs.length : attrInt(node, 'axis', 0);
  const st = strides(xs);
  const idxStrides = strides(ys.slice(axis, axis + q));
  const src = new Int32Array(product(ys));
  forEachIndex(ys, (flat, idx) => {
    let j = 0;
    for (let t = 0; t < q; t++) j += idx[axis + t] * idxStrides[t];
    let k = indices[j];
    if (k < 0) k += xs[axis];
    let s = k * st[axis];
    for (let a = 0; a < axis; a++) s += idx[a] * st[a];
    for (let a = axis + 1; a < xs.length; a++) s += idx[a + q - 1] * st[a];
    src[flat] = s;
  });
  return [linearMapGradient(ctx, g, { lead: [], inDims: xs, outDims: ys, src, taps: 1 })];
};

/** Pad: constant mode's adjoint is a slice; reflect/edge/wrap map each output to one source. */
const pad: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node, b } = ctx;
  const xs = ctx.shape(node.inputs[0]), ys = ctx.shape(node.outputs[0]);
  const rank = xs.length;
  const raw = needValue(ctx, node.inputs[1], 'pads');
  const axes = node.inputs[3] ? needValue(ctx, node.inputs[3], 'axes').map((a) => (a < 0 ? a + rank : a)) : xs.map((_, i) => i);
  const begin = new Array(rank).fill(0);
  axes.forEach((a, i) => (begin[a] = raw[i]));
  const mode = attrString(node, 'mode', 'constant');
  if (mode === 'constant') {
    const starts = [0, ...begin], ends = [2 ** 53, ...begin.map((p, a) => p + xs[a])];
    return [b.op1('Slice', [g, b.constI64(starts.map((s) => Math.max(s, 0))), b.constI64(ends)])];
  }
  const st = strides(xs);
  const src = new Int32Array(product(ys));
  const sourceOf = (o: number, n: number): number => {
    if (mode === 'edge') return Math.min(Math.max(o, 0), n - 1);
    if (mode === 'wrap') return ((o % n) + n) % n;
    // reflect (no edge repeat): period 2(n−1).
    const period = 2 * (n - 1);
    if (period === 0) return 0;
    const m = ((o % period) + period) % period;
    return m < n ? m : period - m;
  };
  forEachIndex(ys, (flat, idx) => {
    let s = 0;
    for (let a = 0; a < rank; a++) s += sourceOf(idx[a] - begin[a], xs[a]) * st[a];
    src[flat] = s;
  });
  return [linearMapGradient(ctx, g, { lead: [], inDims: xs, outDims: ys, src, taps: 1 })];
};

/** Source coordinate of an output coordinate (ONNX Resize spec, coordinate_transformation_mode). */
function sourceCoordinate(mode: string, x: number, scale: number, inLen: number, outLen: number): number {
  switch (mode) {
    case 'half_pixel': return (x + 0.5) / scale - 0.5;
    case 'pytorch_half_pixel': return outLen > 1 ? (x + 0.5) / scale - 0.5 : 0;
    case 'align_corners': return outLen > 1 ? (x * (inLen - 1)) / (outLen - 1) : 0;
    case 'asymmetric': return x / scale;
    case 'half_pixel_symmetric': {
      const adj = outLen / (scale * inLen);
      const center = inLen / 2;
      return center * (1 - adj) + (x + 0.5) / scale - 0.5;
    }
    default: throw new Error(mode);
  }
}

function nearestIndex(mode: string, v: number): number {
  switch (mode) {
    case 'floor': return Math.floor(v);
    case 'ceil': return Math.ceil(v);
    case 'round_prefer_ceil': return Math.floor(v + 0.5);
    default: return Number.isInteger(v - 0.5) ? v - 0.5 : Math.round(v); // round_prefer_floor
  }
}

/** Per-axis taps (source index, weight) of a 1-D nearest or linear resize. */
function axisTaps(ctx: RuleContext, inLen: number, outLen: number, scale: number): { src: number[]; w: number[] }[] {
  const { node } = ctx;
  const linear = attrString(node, 'mode', 'nearest') === 'linear';
  const coord = attrString(node, 'coordinate_transformation_mode', 'half_pixel');
  const nearest = attrString(node, 'nearest_mode', 'round_prefer_floor');
  return Array.from({ length: outLen }, (_, o) => {
    const x = sourceCoordinate(coord, o, scale, inLen, outLen);
    if (!linear) return { src: [Math.min(Math.max(nearestIndex(nearest, x), 0), inLen - 1)], w: [1] };
    const c = Math.min(Math.max(x, 0), inLen - 1);
    const lo = Math.floor(c), hi = Math.min(lo + 1, inLen - 1), f = c - lo;
    return { src: [lo, hi], w: [1 - f, f] };
  });
}

/** Resize (nearest or linear) over the last two axes; other axes must keep their size. */
const resize: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0]) return [];
  const { node } = ctx;
  const xs = ctx.shape(node.inputs[0]), ys = ctx.shape(node.outputs[0]);
  const mode = attrString(node, 'mode', 'nearest');
  if (mode !== 'nearest' && mode !== 'linear') throw new UserError(`${nodeLabel(node)}: Resize mode '${mode}' has no gradient rule`, 'use nearest or linear resizing');
  if (attrInt(node, 'antialias', 0)) throw new UserError(`${nodeLabel(node)}: antialiased Resize has no gradient rule`);
  const rank = xs.length;
  if (xs.slice(0, rank - 2).some((d, i) => d !== ys[i])) throw new UserError(`${nodeLabel(node)}: only spatial (last two axes) resizing is supported`);
  const scalesIn = node.inputs[2] ? ctx.value(node.inputs[2]) : undefined;
  const scaleOf = (a: number) => (scalesIn && scalesIn.length === rank ? scalesIn[a] : ys[a] / xs[a]);
  const [H, W] = xs.slice(rank - 2), [Ho, Wo] = ys.slice(rank - 2);
  const rows = axisTaps(ctx, H, Ho, scaleOf(rank - 2)), cols = axisTaps(ctx, W, Wo, scaleOf(rank - 1));
  const taps = rows[0].src.length * cols[0].src.length;
  const src = new Int32Array(Ho * Wo * taps), weights = new Float32Array(Ho * Wo * taps);
  for (let oh = 0; oh < Ho; oh++) for (let ow = 0; ow < Wo; ow++) {
    let t = (oh * Wo + ow) * taps;
    for (let i = 0; i < rows[oh].src.length; i++) for (let j = 0; j < cols[ow].src.length; j++, t++) {
      src[t] = rows[oh].src[i] * W + cols[ow].src[j];
      weights[t] = rows[oh].w[i] * cols[ow].w[j];
    }
  }
  return [linearMapGradient(ctx, g, { lead: xs.slice(0, rank - 2), inDims: [H, W], outDims: [Ho, Wo], src, weights: taps > 1 ? weights : undefined, taps })];
};

export const indexingRules: Record<string, GradientRule> = { Slice: slice, Gather: gather, Pad: pad, Resize: resize };
