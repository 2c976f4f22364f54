/**
 * Layers (intermediate tensors with a spatial grid) and stages (layers every input→scores path
 * passes through). Stages come from the dominator tree of the tensor graph — a general graph
 * algorithm, no name patterns: a tensor is a cut point iff it dominates the scores.
 */
import { ModelAnalysis } from './analysis';
import { GraphNode, nodeLabel } from './graph';
import { hasGradientRule } from '../autodiff/rules';
import { UserError } from '../errors';

export interface LayerInfo {
  /** The ONNX tensor name. */
  id: string;
  /** Shape without the batch axis: [C,H,W] (spatial), [N,D] (tokens) or [H,W,C] (tokens on a channels-last grid). */
  shape: number[];
  kind: 'spatial' | 'tokens';
  /** The map grid [h, w] (tokens: the square patch grid, class token excluded; channels-last tokens: [H, W]). */
  grid: [number, number];
  /** Tokens only: whether the first token is a class token left out of the grid. */
  classToken?: boolean;
  producer: string;
  isStage: boolean;
  /** Set when an op on the way to the scores has no gradient rule. */
  blockedBy?: { opType: string; node: string };
}

function gridOf(dims: number[], layout: TensorLayout = 'channels-first'): Pick<LayerInfo, 'kind' | 'grid' | 'classToken'> | undefined {
  if (layout === 'unaligned') return undefined;
  if (layout === 'channels-last') {
    return dims.length === 4 && dims[0] === 1 && dims[1] > 1 && dims[2] > 1 ? { kind: 'tokens', grid: [dims[1], dims[2]], classToken: false } : undefined;
  }
  if (dims.length === 4 && dims[0] === 1 && dims[2] > 1 && dims[3] > 1) return { kind: 'spatial', grid: [dims[2], dims[3]] };
  if (dims.length === 3 && dims[0] === 1) {
    const n = dims[1];
    for (const [count, cls] of [[n, false], [n - 1, true]] as [number, boolean][]) {
      const side = Math.round(Math.sqrt(count));
      if (side > 1 && side * side === count) return { kind: 'tokens', grid: [side, side], classToken: cls };
    }
  }
  return undefined;
}

/**
 * How a 4-D tensor's axes lie over the image: 'channels-first' [1,C,H,W] (the default, as every
 * convolution writes), 'channels-last' [1,H,W,C] (token grids of windowed transformers and the
 * MLPs of ConvNeXt-style blocks, between a Transpose [0,2,3,1] and its inverse), or 'unaligned':
 * made from a channels-last tensor by an op that moves tokens off their grid positions (a crop,
 * a cyclic shift built of Slice+Concat, window partitioning by Reshape), so no map of it would
 * sit on the image.
 */
export type TensorLayout = 'channels-first' | 'channels-last' | 'unaligned';

/** Ops that act on each value alone or along the last axis only, keeping a channels-last grid in place. */
const KEEPS_GRID = new Set(['Add', 'Sub', 'Mul', 'Div', 'Pow', 'Max', 'Min', 'Sum', 'Where', 'Relu', 'LeakyRelu', 'PRelu', 'Elu',
  'Sigmoid', 'Tanh', 'HardSigmoid', 'HardSwish', 'Clip', 'Softplus', 'Erf', 'Exp', 'Log', 'Neg', 'Abs', 'Reciprocal', 'Sqrt',
  'Identity', 'Dropout', 'Cast', 'QuantizeLinear', 'DequantizeLinear', 'LayerNormalization']);

/**
 * Layout of every differentiable 4-D tensor that is not channels-first, propagated from the input
 * in graph order. A Transpose [0,2,3,1] of a channels-first tensor starts a channels-last grid;
 * [0,3,1,2] ends it; ops of KEEPS_GRID keep it when an input of the output's shape has it;
 * a MatMul by a constant matrix (a linear map of the channels) keeps it; Concat along the last axis of channels-last tensors and a Slice or Pad that keeps the grid's
 * extent (or takes every k-th token from the first k, as patch merging does) keep it; anything
 * else made from one is 'unaligned'. Our own rules, no source.
 */
export function tensorLayouts(a: ModelAnalysis): Map<string, TensorLayout> {
  const out = new Map<string, TensorLayout>();
  const of = (t: string): TensorLayout => out.get(t) ?? 'channels-first';
  const same = (x: string, y: string) => a.shape(x).join() === a.shape(y).join();
  for (const n of a.graph.order) {
    const ins = diffInputs(a, n);
    if (!ins.length) continue;
    const inLayouts = ins.map(of);
    const anyLast = inLayouts.some((l) => l !== 'channels-first');
    for (const o of n.outputs) {
      if (!o || !a.differentiable(o)) continue;
      const rank = a.shape(o).length;
      let l: TensorLayout = 'channels-first';
      if (n.opType === 'Transpose') {
        const perm = (n.attrs.get('perm') as number[] | undefined)?.join();
        if (inLayouts[0] === 'channels-first' && perm === '0,2,3,1') l = 'channels-last';
        else if (inLayouts[0] === 'channels-last' && perm === '0,3,1,2') l = 'channels-first';
        else if (anyLast) l = 'unaligned';
      } else if (!anyLast) {
        l = 'channels-first';
      } else if (rank !== 4) {
        l = 'unaligned';
      } else if (KEEPS_GRID.has(n.opType)) {
        l = ins.some((i) => of(i) === 'channels-last' && same(i, o)) ? 'channels-last' : 'unaligned';
      } else if (n.opType === 'MatMul') {
        // A linear map of the channels: [1,H,W,C]·[C,D] keeps the grid, changes C.
        const x = n.inputs[0], dx = a.shape(x), dO = a.shape(o);
        l = of(x) === 'channels-last' && !a.differentiable(n.inputs[1]) && dx[1] === dO[1] && dx[2] === dO[2] ? 'channels-last' : 'unaligned';
      } else if (n.opType === 'Concat') {
        const axis = Number(n.attrs.get('axis') ?? 0);
        l = (axis === 3 || axis === -1) && inLayouts.every((x) => x === 'channels-last') ? 'channels-last' : 'unaligned';
      } else if (n.opType === 'Slice' || n.opType === 'Pad') {
        l = inLayouts[0] === 'channels-last' && keepsGridExtent(a, n, ins[0], o) ? 'channels-last' : 'unaligned';
      } else {
        l = 'unaligned';
      }
      if (l !== 'channels-first') out.set(o, l);
    }
  }
  return out;
}

/** A Slice or Pad of a channels-last tensor that leaves H and W whole, or (Slice) takes every k-th row/column from one of the first k. */
function keepsGridExtent(a: ModelAnalysis, n: GraphNode, input: string, output: string): boolean {
  const dIn = a.shape(input), dOut = a.shape(output);
  if (dIn[1] === dOut[1] && dIn[2] === dOut[2]) return true;
  if (n.opType !== 'Slice') return false;
  const starts = a.value(n.inputs[1]), axes = n.inputs[3] ? a.value(n.inputs[3]) : starts?.map((_, i) => i);
  const steps = n.inputs[4] ? a.value(n.inputs[4]) : starts?.map(() => 1);
  if (!starts || !axes || !steps) return false;
  for (const ax of [1, 2]) {
    const k = axes.findIndex((x) => x === ax || x === ax - 4);
    if (k < 0) { if (dIn[ax] !== dOut[ax]) return false; continue; }
    const step = steps[k], start = starts[k] < 0 ? starts[k] + dIn[ax] : starts[k];
    if (!(step >= 1 && start >= 0 && start < step && dOut[ax] === Math.ceil((dIn[ax] - start) / step))) return false;
    if (step === 1 && dOut[ax] !== dIn[ax]) return false;
  }
  return true;
}

/** Differentiable inputs of a node. */
function diffInputs(a: ModelAnalysis, n: GraphNode): string[] {
  return n.inputs.filter((i) => i && a.differentiable(i));
}

/** Tensors from which `target` can be reached through differentiable tensors. */
export function ancestorsOf(a: ModelAnalysis, target: string): Set<string> {
  const seen = new Set<string>([target]);
  const stack = [target];
  while (stack.length) {
    const t = stack.pop()!;
    const p = a.graph.producer.get(t);
    if (!p) continue;
    for (const i of diffInputs(a, p)) if (!seen.has(i)) { seen.add(i); stack.push(i); }
  }
  return seen;
}

/** The chain of tensors dominating `scores` from the image input, shallow to deep. */
export function cutPoints(a: ModelAnalysis, scores: string): string[] {
  const relevant = ancestorsOf(a, scores);
  const idom = new Map<string, string | null>([[a.inputName, null]]);
  const depth = new Map<string, number>([[a.inputName, 0]]);
  const lca = (x: string, y: string): string => {
    while (x !== y) {
      if (depth.get(x)! >= depth.get(y)!) x = idom.get(x)!; else y = idom.get(y)!;
    }
    return x;
  };
  for (const n of a.graph.order) {
    const preds = diffInputs(a, n).filter((i) => relevant.has(i) && idom.has(i));
    if (!preds.length) continue;
    for (const o of n.outputs) {
      if (!o || !relevant.has(o)) continue;
      // A node output is dominated by its producer's inputs' common dominator; with several
      // inputs the output itself still is a cut point when it lies on every path.
      const dom = preds.length === 1 ? preds[0] : preds.reduce(lca);
      idom.set(o, dom);
      depth.set(o, depth.get(dom)! + 1);
    }
  }
  if (!idom.has(scores)) return [];
  const chain: string[] = [];
  for (let t: string | null = scores; t !== null; t = idom.get(t) ?? null) chain.push(t);
  return chain.reverse();
}

/** For each tensor on a path to the scores, the first node without a gradient rule downstream. */
function blockers(a: ModelAnalysis, scores: string, relevant: Set<string>): Map<string, GraphNode> {
  const blocked = new Map<string, GraphNode>();
  for (const n of [...a.graph.order].reverse()) {
    const outs = n.outputs.filter((o) => o && relevant.has(o));
    if (!outs.length) continue;
    const own = hasGradientRule(n.opType, n.domain) ? undefined : n;
    const below = own ?? outs.map((o) => blocked.get(o)).find((x) => x);
    if (!below) continue;
    for (const i of diffInputs(a, n)) if (relevant.has(i) && !blocked.has(i)) blocked.set(i, below);
  }
  return blocked;
}

export function listLayers(a: ModelAnalysis, scores: string): LayerInfo[] {
  const relevant = ancestorsOf(a, scores);
  const blocked = blockers(a, scores, relevant);
  const layouts = tensorLayouts(a);
  const stages = new Set(pickStages(a, cutPoints(a, scores), layouts));
  const layers: LayerInfo[] = [];
  for (const n of a.graph.order) {
    for (const o of n.outputs) {
      if (!o || !relevant.has(o) || !a.floatValued(o)) continue;
      const g = gridOf(a.shape(o), layouts.get(o));
      if (!g) continue;
      const b = blocked.get(o);
      layers.push({ id: o, shape: a.shape(o).slice(1), ...g, producer: `${n.opType} ${n.name}`, isStage: stages.has(o), blockedBy: b ? { opType: b.opType, node: b.name } : undefined });
    }
  }
  return layers;
}

/**
 * From the cut points, the stages worth stepping through: spatial cut points are grouped into
 * runs of equal grid size and each run keeps its block output — the deepest output of a merge
 * (a node joining two paths: residual Add, dense Concat) followed through same-shape
 * single-input ops (ReLU after the Add), else the run's deepest cut point. Token cut points keep
 * every merge output (one per residual connection). Our own heuristic, no source.
 */
export function pickStages(a: ModelAnalysis, cuts: string[], layouts: Map<string, TensorLayout> = tensorLayouts(a)): string[] {
  const info = cuts.map((t) => ({ t, g: gridOf(a.shape(t), layouts.get(t)), p: a.graph.producer.get(t) })).filter((c) => c.g && c.p);
  const isMerge = (p: GraphNode) => diffInputs(a, p).length >= 2;
  const out: string[] = [];
  const extend = (run: typeof info, k: number): string => {
    let j = k;
    while (j + 1 < run.length) {
      const next = run[j + 1];
      const ins = diffInputs(a, next.p!);
      if (ins.length === 1 && ins[0] === run[j].t && a.shape(next.t).join() === a.shape(run[j].t).join()) j++;
      else break;
    }
    return run[j].t;
  };
  let i = 0;
  while (i < info.length) {
    let j = i;
    const key = `${info[i].g!.kind}:${info[i].g!.grid.join('x')}`;
    while (j + 1 < info.length && `${info[j + 1].g!.kind}:${info[j + 1].g!.grid.join('x')}` === key) j++;
    const run = info.slice(i, j + 1);
    if (info[i].g!.kind === 'tokens') {
      run.forEach((c, k) => { if (isMerge(c.p!)) out.push(extend(run, k)); });
      if (!run.some((c) => isMerge(c.p!))) out.push(run[run.length - 1].t);
    } else {
      let k = -1;
      run.forEach((c, idx) => { if (isMerge(c.p!)) k = idx; });
      out.push(k >= 0 ? extend(run, k) : run[run.length - 1].t);
    }
    i = j + 1;
  }
  return [...new Set(out)];
}

/** Ops of quantized graphs (QDQ and QOperator forms): their integer tensors carry no gradient. */
const QUANTIZED_OPS = /^(QuantizeLinear|DequantizeLinear|DynamicQuantizeLinear|QLinear\w+|ConvInteger|MatMulInteger|QGemm|QAttention|DynamicQuantize\w*)$/;

/**
 * Why a model offers no explainable layer, as the error to show: a quantized graph, every layer
 * cut off by an op without a gradient rule, or no tensor with a spatial grid at all.
 */
export function noLayerReason(a: ModelAnalysis, scores: string, layers: LayerInfo[], modelPath: string): UserError {
  const quantized = a.graph.order.find((n) => QUANTIZED_OPS.test(n.opType));
  if (quantized) {
    return new UserError(`${modelPath} is quantized: gradients do not pass through ${nodeLabel(quantized)} and the integer tensors around it`, 'explain the float model exported before quantization');
  }
  const blocked = layers.find((l) => l.blockedBy);
  if (blocked) {
    return new UserError(`no layer of ${modelPath} can be explained: ${blocked.blockedBy!.opType} node '${blocked.blockedBy!.node}' on the way to the scores has no gradient rule`, 'see the README for the ops covered');
  }
  const above = ancestorsOf(a, scores);
  const onPath = [...new Set(a.graph.order.filter((n) => n.outputs.some((o) => above.has(o))).map((n) => n.opType))];
  return new UserError(
    `${modelPath} has no layer with a spatial grid between its input and its scores (ops: ${onPath.slice(0, 8).join(', ') || 'none'})`,
    'maps need an intermediate tensor [1,C,H,W] with H,W > 1 or a square grid of tokens, as in convolutional and vision-transformer classifiers',
  );
}
