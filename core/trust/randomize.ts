/**
 * Weight randomization for the sanity check (Adebayo et al., NeurIPS 2018): rewrite chosen float
 * initializers of a model in memory and hand back a new model (its sha256 differs, so the
 * engine prepares and caches it apart from the original).
 */
import { UserError } from '../errors';
import { LoadedModel, modelFromBytes } from '../model/load';
import { encodeModelProto, TensorProto, TensorType } from '../model/proto';
import { tensorValues } from '../model/tensor';
import { gaussianSampler } from '../metrics/random';
import { PreparedModel, prepareModel } from '../plan/prepared';
import { GraphIndex, GraphNode } from '../model/graph';

/**
 * Ops whose constant inputs count as learned weights, and which of their inputs do. Batch and
 * layer norm keep their running mean/variance: a random variance may be negative and would
 * only make NaNs, not a randomized model (this project's choice).
 */
const WEIGHT_INPUTS: Record<string, number[] | 'all'> = {
  Conv: [1, 2], ConvTranspose: [1, 2], Gemm: 'all', MatMul: 'all',
  BatchNormalization: [1, 2], LayerNormalization: [1, 2], InstanceNormalization: [1, 2], GroupNormalization: [1, 2],
};

/**
 * A copy of the model with each named float initializer replaced by Gaussian draws rescaled to
 * exactly the original's mean and (population) standard deviation — scale-matched, so activations
 * keep their magnitude and only the learned structure is destroyed. Each tensor's draws depend
 * only on (seed, tensor name), so a tensor gets the same random values in the cascade and in the
 * independent test. A constant tensor (std 0) cannot change under scale matching and is kept.
 */
export function randomizedModel(model: LoadedModel, initializerNames: readonly string[], seed: number): LoadedModel {
  const graph = model.proto.graph!;
  const inits = graph.initializer ?? [];
  const byName = new Map(inits.map((t) => [t.name ?? '', t]));
  for (const name of initializerNames) {
    const t = byName.get(name);
    if (!t) throw new UserError(`${model.path}: no initializer named '${name}' to randomize`, 'pick names from the model\'s initializers');
    if (t.data_type !== TensorType.FLOAT) throw new UserError(`${model.path}: initializer '${name}' is not float32 (type ${t.data_type}); only float weights can be randomized`);
  }
  const chosen = new Set(initializerNames);
  const initializer = inits.map((t) => (chosen.has(t.name ?? '') ? scaleMatchedDraw(t, seedFor(seed, t.name ?? '')) : t));
  const bytes = encodeModelProto({ ...model.proto, graph: { ...graph, initializer } });
  return modelFromBytes(bytes, model.path);
}

function scaleMatchedDraw(t: TensorProto, seed: number): TensorProto {
  const values = tensorValues(t) as Float32Array;
  const n = values.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += values[i];
  mean /= n;
  let v = 0;
  for (let i = 0; i < n; i++) v += (values[i] - mean) ** 2;
  const std = Math.sqrt(v / n);
  if (!(std > 0) || n < 2) return t;
  const gauss = gaussianSampler(seed);
  const z = new Float64Array(n);
  let zm = 0;
  for (let i = 0; i < n; i++) zm += z[i] = gauss();
  zm /= n;
  let zv = 0;
  for (let i = 0; i < n; i++) zv += (z[i] - zm) ** 2;
  const zs = Math.sqrt(zv / n) || 1;
  const out = new Float32Array(n);
  for (let i = 0; i < n; i++) out[i] = mean + (std * (z[i] - zm)) / zs;
  const { float_data: _f, raw_data: _r, ...rest } = t;
  return { ...rest, data_type: TensorType.FLOAT, raw_data: new Uint8Array(out.buffer) };
}

/** FNV-1a hash of the name mixed into the seed (FNV: Fowler, Noll & Vo, public-domain hash). */
function seedFor(seed: number, name: string): number {
  let h = 0x811c9dc5 ^ (seed >>> 0);
  for (let i = 0; i < name.length; i++) h = Math.imul(h ^ name.charCodeAt(i), 0x01000193);
  return h >>> 0;
}

/** The weights of one block of the cascade: those used between the stage below it and its own top. */
export interface WeightBlock {
  /** The tensor the block computes: a stage, or the scores for the head above the last stage. */
  stage: string;
  initializers: string[];
}

/**
 * The model's weights cut into blocks at its stages (core/model/layers: tensors every path from
 * input to scores passes through), from the scores downwards: the head between the last stage
 * and the scores (named after the scores), then the block computing the last stage from the one
 * below it, and so on down to the block computing the first stage from the input. Only float
 * initializers of the original model count (the opset upgrade may add constants).
 */
export function stageWeightBlocks(pm: PreparedModel): WeightBlock[] {
  const g = pm.analysis.graph;
  const original = pm.model.graph.initializers;
  const stages = pm.layers.filter((l) => l.isStage).map((l) => l.id);
  const cuts = [pm.model.input.name, ...stages, pm.scores.tensor];
  const blocks: WeightBlock[] = [];
  for (let i = cuts.length - 1; i >= 1; i--) {
    const names = new Set<string>();
    for (const n of nodesBetween(g, cuts[i - 1], cuts[i])) {
      for (const w of weightInputs(g, n)) if (original.get(w)?.data_type === TensorType.FLOAT) names.add(w);
    }
    blocks.push({ stage: cuts[i], initializers: [...names] });
  }
  return blocks.filter((b) => b.initializers.length > 0);
}

/**
 * The randomized model prepared like the original without a new shape probe: rewriting weights
 * changes no shape, so the original's tensor facts carry over (copied, since preparing adds to them).
 */
export function prepareRandomized(pm: PreparedModel, model: LoadedModel): PreparedModel {
  const facts = new Map([...pm.analysis.facts].map(([k, f]) => [k, { ...f, dims: [...f.dims] }]));
  return prepareModel(model, facts, pm.inputDims);
}

/** Nodes reachable forward from `from` that also reach `to` (for cut points: the block between them). */
function nodesBetween(g: GraphIndex, from: string, to: string): GraphNode[] {
  const down = new Set<string>([from]);
  const reached = new Set<GraphNode>();
  for (const n of g.order) {
    if (!n.inputs.some((i) => down.has(i))) continue;
    reached.add(n);
    if (n.outputs.includes(to)) continue; // stop at the next cut
    for (const o of n.outputs) if (o) down.add(o);
  }
  const up = new Set<string>([to]);
  const out: GraphNode[] = [];
  for (let k = g.order.length - 1; k >= 0; k--) {
    const n = g.order[k];
    if (!reached.has(n) || !n.outputs.some((o) => up.has(o))) continue;
    out.push(n);
    for (const i of n.inputs) if (i && i !== from) up.add(i);
  }
  return out;
}

/** Float initializers feeding a node's weight inputs, directly or through image-independent nodes (Transpose of a weight, …). */
function weightInputs(g: GraphIndex, n: GraphNode): string[] {
  const spec = WEIGHT_INPUTS[n.opType];
  if (!spec) return [];
  const picked = spec === 'all' ? n.inputs : spec.map((i) => n.inputs[i]).filter((x): x is string => !!x);
  const found: string[] = [];
  const visit = (t: string, depth: number): void => {
    if (g.initializers.has(t)) { found.push(t); return; }
    const p = g.producer.get(t);
    if (!p || depth > 8) return;
    if (p.inputs.every((i) => !i || g.initializers.has(i) || constantTensor(g, i, depth + 1))) for (const i of p.inputs) if (i) visit(i, depth + 1);
  };
  for (const t of picked) visit(t, 0);
  return found;
}

function constantTensor(g: GraphIndex, t: string, depth: number): boolean {
  if (g.initializers.has(t)) return true;
  const p = g.producer.get(t);
  if (!p || depth > 8) return false;
  return p.inputs.every((i) => !i || constantTensor(g, i, depth + 1));
}
