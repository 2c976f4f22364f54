/**
 * Composes one ONNX graph per request shape: the forward, the seeds at the scores, one backward
 * pass per ReLU mode, and per-layer heads that reduce gradients to maps (and upsample them)
 * inside the graph, so only small maps cross into JavaScript (DESIGN §3).
 *
 * Seeds: row k of the seed matrix is base_k + coef_k·softmax(z), so logit seeds (coef 0) and
 * cross-entropy seeds p − e_r (base −e_r, coef 1) share one mechanism and one run.
 */
import { UserError } from '../errors';
import { ModelProto, TensorType, encodeModelProto } from '../model/proto';
import { GraphBuilder } from '../autodiff/builder';
import { buildBackward } from '../autodiff/backward';
import { PreparedModel } from './prepared';
import { LayerInfo } from '../model/layers';
import { splitPlan, SplitPlan } from './split';

export type HeadKind = 'grad' | 'cam' | 'mismatch' | 'expectancy' | 'detail';

export interface PlanPass {
  relu: 'standard' | 'guided';
  /** Layer ids (tensor names); the image input is allowed for 'grad' and 'detail'. */
  layers: string[];
  heads: HeadKind[];
}

export interface PlanRequest {
  passes: PlanPass[];
  /** Forward tensors to return as they are (activations, for checks and trust tests). */
  expose?: string[];
  /** Also split the plan into forward and backward graphs (for sweeps of many seed chunks). */
  split?: boolean;
  /** Add seeds on the predicted classes: row k gains c_k1·e_top1 + c_k2·e_top2 (input ff_seed_rank [K,2]). */
  rankSeeds?: boolean;
}

/** Output names of one head at one layer: `raw` at layer resolution, `up` at input resolution. */
export interface HeadOutputs { raw?: string; up?: string; acc?: string; raw2?: string; up2?: string }

export interface ComposedPlan {
  bytes: Uint8Array;
  key: string;
  seedBase: string;
  seedCoef: string;
  /** [K,2] weights of the top-1 and top-2 one-hots, when the request asked for rank seeds. */
  seedRank?: string;
  /** Mismatch accumulators to feed ([1,C,H,W] per layer) and the scalar weight of the sum. */
  accInputs: Map<string, string>;
  accScale?: string;
  /** int64 [1] input: the first seed row summed into the accumulators (rows before it are the μ and mean rows). */
  sweepFrom?: string;
  /** Output carrying the scores (logits) of the forward. */
  scoresOutput: string;
  outputs: Map<string, HeadOutputs>; // key `${pass}|${head}|${layer}`
  /** The forward/backward split, when asked for and possible. */
  split?: SplitPlan;
}

export const SEED_BASE = 'ff_seed_base';
export const SEED_COEF = 'ff_seed_coef';
export const SEED_RANK = 'ff_seed_rank';
export const ACC_SCALE = 'ff_acc_scale';
export const SWEEP_FROM = 'ff_sweep_from';

export function headKey(pass: number, head: HeadKind, layer: string): string {
  return `${pass}|${head}|${layer}`;
}

export function composePlan(pm: PreparedModel, req: PlanRequest): ComposedPlan {
  const b = new GraphBuilder('ff/');
  const a = pm.analysis;
  const R = pm.scores.numClasses;
  const scoresShape = a.shape(pm.scores.tensor);
  const inputName = pm.model.input.name;
  const nhwc = isNhwc(pm.inputDims);
  const inputHW = nhwc ? pm.inputDims.slice(1, 3) : pm.inputDims.slice(2, 4);

  // Seeds: base + coef·softmax(z), reshaped to [K, ...scoresShape].
  const probs = b.op1('Softmax', [b.op1('Reshape', [pm.scores.tensor, b.constI64([1, R])])], { axis: { i: -1 } });
  let seeds = b.op1('Add', [SEED_BASE, b.op1('Mul', [SEED_COEF, probs])]);
  if (req.rankSeeds) {
    // The prediction decides fact and foil inside the run: one-hots of the two largest scores.
    const flat = b.op1('Reshape', [pm.scores.tensor, b.constI64([1, R])]);
    const top = b.op('TopK', [flat, b.constI64([Math.min(2, R)])], { axis: { i: -1 } }, 2)[1];
    const hot = b.op1('OneHot', [b.op1('Reshape', [top, b.constI64([-1])]), b.constI64([R]), b.constF([0, 1], [2])], { axis: { i: -1 } });
    seeds = b.op1('Add', [seeds, b.op1('MatMul', [SEED_RANK, hot])]);
  }
  const seed = b.op1('Reshape', [seeds, b.constI64([-1, ...scoresShape])]);
  const seedCount = b.op1('Slice', [b.op1('Shape', [SEED_BASE]), b.constI64([0]), b.constI64([1])]);

  const outputs = new Map<string, HeadOutputs>();
  const graphOutputs: string[] = [];
  const accInputs = new Map<string, string>();
  let accScale: string | undefined;
  let sweepFrom: string | undefined;
  const forwardOutputs = new Map<number, Map<number, string>>();

  req.passes.forEach((pass, pi) => {
    const wrt = [...new Set(pass.layers)];
    for (const l of wrt) if (l !== inputName && !pm.layers.some((x) => x.id === l)) {
      throw new UserError(`layer '${l}' is not a layer of ${pm.model.path}`, 'run `factfoil layers <model>` to list them');
    }
    const needsBackward = pass.heads.some((h) => h !== 'expectancy');
    const bw = needsBackward
      ? buildBackward(a, { scores: pm.scores.tensor, wrt, seed, seedCount, relu: pass.relu }, b)
      : { grads: new Map<string, string>(), forwardOutputs: new Map() };
    for (const [ni, slots] of bw.forwardOutputs) {
      const m = forwardOutputs.get(ni) ?? new Map<number, string>();
      for (const [s, n] of slots) m.set(s, n);
      forwardOutputs.set(ni, m);
    }
    wrt.forEach((layerId, li) => {
      const layer = pm.layers.find((x) => x.id === layerId);
      const g = bw.grads.get(layerId);
      for (const head of pass.heads) {
        const name = (what: string) => `ff_out/${pi}/${head}/${li}/${what}`;
        const out: HeadOutputs = {};
        if (head === 'grad') {
          b.opTo('Identity', [g!], [name('grad')]);
          out.raw = name('grad');
        } else if (head === 'detail') {
          // Guided backpropagation map: max over channels of the positive part (DESIGN §4).
          const channelAxis = layerId === inputName ? (nhwc ? 4 : 2) : 2;
          b.opTo('ReduceMax', [b.op1('Relu', [g!]), b.constI64([channelAxis])], [name('raw')], { keepdims: { i: 0 } });
          out.raw = name('raw');
        } else {
          if (!layer) throw new UserError(`head '${head}' needs a spatial layer, '${layerId}' is not one`);
          const grid = toGrid(b, layer, layerId, g);
          if (head === 'cam') {
            // Grad-CAM (Selvaraju et al., ICCV 2017): α_k = GAP(∂s/∂A_k); map = ReLU(Σ_k α_k A_k).
            const alpha = b.op1('ReduceMean', [grid.g!, b.constI64([3, 4])], { keepdims: { i: 1 } });
            const cam = b.op1('Relu', [b.op1('ReduceSum', [b.op1('Mul', [alpha, grid.a]), b.constI64([2])], { keepdims: { i: 0 } })]);
            Object.assign(out, emitMap(b, cam, name, layer, inputHW));
          } else if (head === 'expectancy') {
            // DESIGN §4 (this project's baseline): |mean_k A| · var_k A over channels.
            const mean = b.op1('ReduceMean', [grid.a, b.constI64([1])], { keepdims: { i: 1 } });
            const d = b.op1('Sub', [grid.a, mean]);
            const variance = b.op1('ReduceMean', [b.op1('Mul', [d, d]), b.constI64([1])], { keepdims: { i: 1 } });
            Object.assign(out, emitMap(b, b.op1('Mul', [b.op1('Abs', [mean]), variance]), name, layer, inputHW));
          } else if (head === 'mismatch') {
            Object.assign(out, mismatchHead(b, grid, layer, R, name, inputHW, accInputs, li, () => (accScale ??= ACC_SCALE), () => (sweepFrom ??= SWEEP_FROM)));
          }
        }
        outputs.set(headKey(pi, head, layerId), out);
        for (const v of Object.values(out)) if (v) graphOutputs.push(v);
      }
    });
  });

  for (const t of req.expose ?? []) graphOutputs.push(t);
  const scoresOutput = 'ff_out/scores';
  b.opTo('Identity', [pm.scores.tensor], [scoresOutput]);
  graphOutputs.push(scoresOutput);
  const model = assemble(pm, b, graphOutputs, forwardOutputs, accInputs, accScale, sweepFrom, !!req.rankSeeds);
  const key = JSON.stringify(req);
  const split = req.split ? splitPlan(model, inputName, [SEED_BASE, SEED_COEF, ...accInputs.values(), ...(accScale ? [accScale] : []), ...(sweepFrom ? [sweepFrom] : [])]) : undefined;
  return { bytes: encodeModelProto(model), key, split, seedBase: SEED_BASE, seedCoef: SEED_COEF, seedRank: req.rankSeeds ? SEED_RANK : undefined, accInputs, accScale, sweepFrom, scoresOutput, outputs };
}

export function isNhwc(inputDims: number[]): boolean {
  return inputDims.length === 4 && (inputDims[3] === 3 || inputDims[3] === 1) && inputDims[1] !== 3 && inputDims[1] !== 1;
}

/** Brings a layer and its gradient to grid form: A [1,C,h,w], g [K,1,C,h,w] (tokens transposed, class token dropped). */
function toGrid(b: GraphBuilder, layer: LayerInfo, id: string, g: string | undefined): { a: string; g?: string } {
  if (layer.kind === 'spatial') return { a: id, g };
  const [h, w] = layer.grid;
  const D = layer.shape[layer.shape.length - 1];
  const drop = layer.classToken ? 1 : 0;
  const big = 2 ** 53;
  // Tokens on a channels-last grid [1,H,W,C] (windowed transformers) are first read as [1,H·W,C].
  if (layer.shape.length === 3) {
    id = b.op1('Reshape', [id, b.constI64([1, h * w, D])]);
    if (g) g = b.op1('Reshape', [g, b.constI64([-1, 1, h * w, D])]);
  }
  const a0 = drop ? b.op1('Slice', [id, b.constI64([1]), b.constI64([big]), b.constI64([1])]) : id;
  const a = b.op1('Reshape', [b.op1('Transpose', [a0], { perm: { ints: [0, 2, 1] } }), b.constI64([1, D, h, w])]);
  if (!g) return { a };
  const g0 = drop ? b.op1('Slice', [g, b.constI64([1]), b.constI64([big]), b.constI64([2])]) : g;
  const gg = b.op1('Reshape', [b.op1('Transpose', [g0], { perm: { ints: [0, 1, 3, 2] } }), b.constI64([-1, 1, D, h, w])]);
  return { a, g: gg };
}

/** A map [K,1,h,w] → outputs raw [K,h,w] and bilinearly upsampled [K,H,W] (Resize linear, half_pixel). */
function emitMap(b: GraphBuilder, map: string, name: (w: string) => string, layer: LayerInfo, inputHW: number[], suffix = ''): HeadOutputs {
  const [h, w] = layer.grid;
  b.opTo('Reshape', [map, b.constI64([-1, h, w])], [name(`raw${suffix}`)]);
  const lead = b.op1('Slice', [b.op1('Shape', [map]), b.constI64([0]), b.constI64([2])]);
  const sizes = b.op1('Concat', [lead, b.constI64(inputHW)], { axis: { i: 0 } });
  const up = b.op1('Resize', [map, '', '', sizes], { mode: { s: 'linear' }, coordinate_transformation_mode: { s: 'half_pixel' } });
  b.opTo('Reshape', [up, b.constI64([-1, ...inputHW])], [name(`up${suffix}`)]);
  return suffix ? { raw2: name(`raw${suffix}`), up2: name(`up${suffix}`) } : { raw: name('raw'), up: name('up') };
}

/**
 * Expectancy-mismatch statistics (DESIGN §4). Seed rows: 0 → μ = Jᵀ(p − 1/R), 1 → Jᵀm with m the
 * mean seed, rows from `sweepFrom` on → sweep seeds whose squared gradients are summed into the
 * accumulator (a run that only accumulates sets sweepFrom 0, so every row is a sweep seed). With
 * w the weight of the sum, σ² = (1/R)·w·acc − (Jᵀm)²: one-hot seeds e_r with m = 1/R (the
 * definition), or seeds whose outer products sum to the centring projector I − 11ᵀ/R (centred
 * one-hot, the head's spectral basis, centred probes) with m = 0.
 * Outputs: `weighted` Σ_k|μ·σ²·A| and `gradient` Σ_k|μ|·σ² (channel reductions: our own choice).
 */
function mismatchHead(b: GraphBuilder, grid: { a: string; g?: string }, layer: LayerInfo, R: number, name: (w: string) => string,
  inputHW: number[], accInputs: Map<string, string>, li: number, scale: () => string, sweepFrom: () => string): HeadOutputs {
  const g = grid.g!;
  const big = 2 ** 53;
  const row = (i: number) => b.op1('Squeeze', [b.op1('Slice', [g, b.constI64([i]), b.constI64([i + 1]), b.constI64([0])]), b.constI64([0])]);
  const mu = row(0), mean = row(1);
  const sweep = b.op1('Slice', [g, sweepFrom(), b.constI64([big]), b.constI64([0])]);
  const sq = b.op1('ReduceSum', [b.op1('Mul', [sweep, sweep]), b.constI64([0])], { keepdims: { i: 0 } });
  const accIn = `ff_acc_${li}`;
  accInputs.set(layer.id, accIn);
  const acc = name('acc');
  b.opTo('Add', [accIn, sq], [acc]);
  const colNorms = b.op1('Mul', [acc, scale()]);
  const variance = b.op1('Relu', [b.op1('Sub', [b.op1('Mul', [colNorms, b.scalarF(1 / R)]), b.op1('Mul', [mean, mean])])]);
  const weighted = b.op1('ReduceSum', [b.op1('Abs', [b.op1('Mul', [b.op1('Mul', [mu, variance]), grid.a])]), b.constI64([1])], { keepdims: { i: 1 } });
  const gradient = b.op1('ReduceSum', [b.op1('Mul', [b.op1('Abs', [mu]), variance]), b.constI64([1])], { keepdims: { i: 1 } });
  return { ...emitMap(b, weighted, name, layer, inputHW), ...emitMap(b, gradient, name, layer, inputHW, '_gradient'), acc };
}

function assemble(pm: PreparedModel, b: GraphBuilder, outputs: string[], forwardOutputs: Map<number, Map<number, string>>,
  accInputs: Map<string, string>, accScale: string | undefined, sweepFrom: string | undefined, rankSeeds: boolean): ModelProto {
  const original = pm.model.proto;
  const nodes = pm.nodes.map((n, i) => {
    const extra = forwardOutputs.get(i);
    if (!extra) return n;
    const outs = [...(n.output ?? [])];
    for (const [slot, name] of extra) { while (outs.length <= slot) outs.push(''); outs[slot] = name; }
    return { ...n, output: outs };
  });
  const R = pm.scores.numClasses;
  const f = (name: string, dims: (number | string)[]) => ({ name, type: { tensor_type: { elem_type: TensorType.FLOAT, shape: { dim: dims.map((d) => (typeof d === 'number' ? { dim_value: d } : { dim_param: d })) } } } });
  const inputs = [
    f(pm.model.input.name, pm.inputDims),
    f(SEED_BASE, ['K', R]),
    f(SEED_COEF, ['K', 1]),
    ...(rankSeeds ? [f(SEED_RANK, ['K', Math.min(2, R)])] : []),
    ...[...accInputs].map(([layer, n]) => f(n, pm.layers.find((l) => l.id === layer)?.kind === 'spatial' ? [1, ...pm.analysis.shape(layer).slice(1)] : gridShape(pm, layer))),
    ...(accScale ? [f(accScale, [])] : []),
    ...(sweepFrom ? [{ name: sweepFrom, type: { tensor_type: { elem_type: TensorType.INT64, shape: { dim: [{ dim_value: 1 }] } } } }] : []),
  ];
  const model: ModelProto = {
    ...original,
    ir_version: Math.max(original.ir_version ?? 8, 8),
    opset_import: [...(original.opset_import ?? []).filter((o) => o.domain && o.domain !== 'ai.onnx'), { domain: '', version: pm.opset }],
    graph: {
      ...original.graph,
      node: [...nodes, ...b.nodes],
      initializer: [...pm.initializers, ...b.initializers],
      input: inputs,
      output: outputs.map((name) => ({ name })),
      value_info: [],
    },
  };
  return model;
}

function gridShape(pm: PreparedModel, layer: string): number[] {
  const l = pm.layers.find((x) => x.id === layer)!;
  return [1, l.shape[l.shape.length - 1], ...l.grid];
}
