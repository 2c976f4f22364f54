/**
 * The map kinds of DESIGN §4 as plan recipes. Gradient questions (evidence, contrast) and the
 * expectancy baseline share one run over all requested layers; guided backpropagation is a
 * second pass in the same run; mismatch statistics sweep seeds in chunks.
 */
import { Engine, SeedBatch } from '../engine/engine';
import { PreparedModel } from '../plan/prepared';
import { headKey, HeadKind, PlanPass } from '../plan/compose';
import { UserError } from '../errors';
import { floatTensor, ort } from '../engine/runtime';
import { requireSeedsFit, seedChunkSize } from '../engine/budget';
import { ProbeDesign, sweepSeeds } from './mismatch-seeds';

export type MapKind = 'evidence' | 'contrast' | 'mismatch' | 'expectancy' | 'detail' | 'guided-evidence';
export const MAP_KINDS: readonly MapKind[] = ['evidence', 'contrast', 'mismatch', 'expectancy', 'detail', 'guided-evidence'];
export type ContrastVariant = 'margin' | 'loss';
export type MismatchVariant = 'weighted' | 'gradient';
/** Probe estimates take K seeds of a design (default: mismatch-seeds.ts DEFAULT_PROBE_DESIGN). */
export type Estimate = { mode: 'exact' } | { mode: 'probe'; k: number; seed: number; design?: ProbeDesign };

export interface Question {
  kind: MapKind;
  fact: number;
  foil?: number;
  contrast?: ContrastVariant;
  mismatch?: MismatchVariant;
}

export interface Grid { data: Float32Array; width: number; height: number }

export interface MapResult {
  question: Question;
  /** Layer id; the image input for detail maps. */
  layer: string;
  /** At layer resolution, unnormalized (input resolution for detail maps). */
  raw: Grid;
  /** Bilinearly upsampled to the model input (ONNX Resize linear, half_pixel). */
  up: Grid;
  estimate?: Estimate & { seeds: number };
  note?: string;
}

export interface ExplainOptions {
  estimate?: Estimate;
  /** Memory budget for one chunk of seeds, bytes. */
  budgetBytes?: number;
  onProgress?: (done: number, total: number) => void;
  /** Exact mode's seeds: 'auto' (the head's spectral basis when the head is linear, else centred one-hot) or the definition's one-hot sweep. */
  exactBasis?: 'auto' | 'one-hot';
  signal?: AbortSignal;
}

const DEFAULT_PROBE_SEED = 1;

/** The seed row of a gradient question (DESIGN §4): margin e_fact − e_foil, loss p − e_foil, evidence e_fact. */
function questionSeed(q: Question, R: number): { base: Float32Array; coef: number } {
  const base = new Float32Array(R);
  if (q.kind === 'contrast') {
    if (q.foil === undefined) throw new UserError('a contrast map needs a foil class', 'pass --foil <label|index>');
    if ((q.contrast ?? 'margin') === 'margin') { base[q.fact] += 1; base[q.foil] -= 1; return { base, coef: 0 }; }
    base[q.foil] = -1;
    return { base, coef: 1 };
  }
  base[q.fact] = 1;
  return { base, coef: 0 };
}

function stack(rows: { base: Float32Array; coef: number }[], R: number): SeedBatch {
  const base = new Float32Array(rows.length * R);
  const coef = new Float32Array(rows.length);
  rows.forEach((r, i) => { base.set(r.base, i * R); coef[i] = r.coef; });
  return { base, coef, k: rows.length };
}

function slice(t: { data: unknown; dims: readonly number[] }, k: number): Grid {
  const dims = t.dims.map(Number);
  const [h, w] = dims.slice(-2);
  const data = (t.data as Float32Array).subarray(k * h * w, (k + 1) * h * w);
  return { data: Float32Array.from(data), width: w, height: h };
}

export async function explainMaps(engine: Engine, pm: PreparedModel, input: Float32Array, questions: Question[], layers: string[], opts: ExplainOptions = {}): Promise<MapResult[]> {
  for (const l of layers) {
    const info = pm.layers.find((x) => x.id === l);
    if (!info) throw new UserError(`'${l}' is not a layer of ${pm.model.path}`, 'run `factfoil layers <model>` to list them');
    if (info.blockedBy) throw new UserError(`layer '${l}' cannot be explained: ${info.blockedBy.opType} node '${info.blockedBy.node}' on its way to the scores has no gradient rule`, 'pick a deeper layer');
  }
  const R = pm.scores.numClasses;
  const gradQs = questions.filter((q) => q.kind === 'evidence' || q.kind === 'contrast');
  const needDetail = questions.some((q) => q.kind === 'detail' || q.kind === 'guided-evidence');
  // guided-evidence needs the evidence of its fact at each layer.
  for (const q of questions) if (q.kind === 'guided-evidence' && !gradQs.some((g) => g.kind === 'evidence' && g.fact === q.fact)) gradQs.push({ kind: 'evidence', fact: q.fact });
  const needExpectancy = questions.some((q) => q.kind === 'expectancy');
  const results: MapResult[] = [];

  const heads: HeadKind[] = [...(gradQs.length ? ['cam' as const] : []), ...(needExpectancy ? ['expectancy' as const] : [])];
  const passes: PlanPass[] = [];
  if (heads.length && layers.length) passes.push({ relu: 'standard', layers, heads });
  const detailFacts = [...new Set(questions.filter((q) => q.kind === 'detail' || q.kind === 'guided-evidence').map((q) => q.fact))];
  if (needDetail) passes.push({ relu: 'guided', layers: [pm.model.input.name], heads: ['detail'] });

  const evidenceUp = new Map<string, Grid>();
  if (passes.length) {
    const cp = await engine.compile(pm, { passes });
    // One seed row per gradient question, then one per detail fact (the guided pass reads those rows).
    const rows = [...gradQs.map((q) => questionSeed(q, R)), ...detailFacts.map((f) => questionSeed({ kind: 'evidence', fact: f }, R))];
    if (!rows.length) rows.push({ base: new Float32Array(R), coef: 0 });
    requireSeedsFit(pm, needDetail ? [...layers, pm.model.input.name] : layers, rows.length, passes.length, opts.budgetBytes);
    const fetch = [...cp.plan.outputs.values()].flatMap((o) => [o.raw, o.up]).filter((x): x is string => !!x);
    const out = await engine.run(pm, cp, input, stack(rows, R), fetch, {}, opts.signal);
    const guidedPass = passes.findIndex((p) => p.relu === 'guided');
    for (const layer of layers) {
      if (gradQs.length) {
        const o = cp.plan.outputs.get(headKey(0, 'cam', layer))!;
        gradQs.forEach((q, k) => {
          const r = { question: q, layer, raw: slice(out[o.raw!], k), up: slice(out[o.up!], k) };
          if (q.kind === 'evidence') evidenceUp.set(`${q.fact}|${layer}`, r.up);
          if (questions.includes(q)) results.push(r);
        });
      }
      if (needExpectancy) {
        const o = cp.plan.outputs.get(headKey(0, 'expectancy', layer))!;
        const q = questions.find((x) => x.kind === 'expectancy')!;
        results.push({ question: q, layer, raw: slice(out[o.raw!], 0), up: slice(out[o.up!], 0) });
      }
    }
    if (guidedPass >= 0) {
      const o = cp.plan.outputs.get(headKey(guidedPass, 'detail', pm.model.input.name))!;
      const t = out[o.raw!];
      for (const q of questions.filter((x) => x.kind === 'detail' || x.kind === 'guided-evidence')) {
        const detail = slice(t, gradQs.length + detailFacts.indexOf(q.fact));
        if (q.kind === 'detail') { results.push({ question: q, layer: pm.model.input.name, raw: detail, up: detail }); continue; }
        // Guided Grad-CAM (Selvaraju et al.): detail ⊙ evidence upsampled to the input.
        for (const layer of layers) {
          const ev = evidenceUp.get(`${q.fact}|${layer}`)!;
          const prod = new Float32Array(detail.data.length);
          for (let i = 0; i < prod.length; i++) prod[i] = detail.data[i] * ev.data[i];
          const g = { data: prod, width: detail.width, height: detail.height };
          results.push({ question: q, layer, raw: g, up: g });
        }
      }
    }
  }
  const mismatchQs = questions.filter((q) => q.kind === 'mismatch');
  if (mismatchQs.length && layers.length) results.push(...(await mismatchMaps(engine, pm, input, mismatchQs, layers, opts)));
  return results;
}

/**
 * Expectancy-mismatch maps (DESIGN §4): μ from one seed, σ² from the column norms of the
 * centred backward map, swept in chunks whose squared gradients accumulate in-graph
 * (mismatch-seeds.ts: the head's spectral basis or centred one-hot seeds when exact, K probes
 * of the chosen design otherwise). Only the last chunk carries the μ and mean rows.
 */
async function mismatchMaps(engine: Engine, pm: PreparedModel, input: Float32Array, qs: Question[], layers: string[], opts: ExplainOptions): Promise<MapResult[]> {
  const R = pm.scores.numClasses;
  const estimate = opts.estimate ?? { mode: 'exact' };
  const sweep = sweepSeeds(pm, estimate.mode === 'exact' ? { mode: 'exact', basis: opts.exactBasis } : { ...estimate, seed: estimate.seed ?? DEFAULT_PROBE_SEED });
  const total = sweep.n;
  // Runs of at most `rows` seed rows, evenly filled; the last also carries the μ and mean rows.
  // Several runs share one forward (a split plan); a single run keeps the one-session plan.
  const rows = seedChunkSize(pm, layers, opts.budgetBytes);
  const runs = Math.max(1, Math.ceil((total + 2) / rows));
  const cp = await engine.compile(pm, { passes: [{ relu: 'standard', layers, heads: ['mismatch'] }], ...(runs > 1 ? { split: true } : {}) });
  const chunk = Math.ceil((total + 2) / runs);
  const acc = new Map<string, Float32Array>();
  const accDims = new Map<string, number[]>();
  for (const l of layers) {
    const info = pm.layers.find((x) => x.id === l)!;
    const dims = info.kind === 'spatial' ? [1, ...info.shape] : [1, info.shape[info.shape.length - 1], ...info.grid];
    accDims.set(l, dims);
    acc.set(l, new Float32Array(dims.reduce((a, b) => a * b, 1)));
  }
  let last: Record<string, { data: unknown; dims: readonly number[] }> = {};
  const one = floatTensor(Float32Array.of(1), []);
  for (let done = 0; ;) {
    if (opts.signal?.aborted) throw new UserError('cancelled');
    const final = total - done + 2 <= chunk;
    const n = final ? total - done : Math.min(chunk, total - done - 1);
    const lead = final ? 2 : 0;
    const base = new Float32Array((n + lead) * R);
    const coef = new Float32Array(n + lead);
    if (final) {
      base.fill(-1 / R, 0, R); coef[0] = 1; // μ seed: p − 1/R
      if (sweep.mean === 'uniform') base.fill(1 / R, R, 2 * R); // Jᵀ1/R, subtracted from the one-hot column norms
    }
    base.set(sweep.rows.subarray(done * R, (done + n) * R), lead * R);
    done += n;
    const extra: Record<string, ReturnType<typeof floatTensor>> = {};
    for (const l of layers) extra[cp.plan.accInputs.get(l)!] = floatTensor(acc.get(l)!, accDims.get(l)!);
    extra[cp.plan.accScale!] = one; // every seed row already carries the square root of its weight
    extra[cp.plan.sweepFrom!] = new ort.Tensor('int64', BigInt64Array.of(BigInt(lead)), [1]);
    const fetch = layers.flatMap((l) => { const o = cp.plan.outputs.get(headKey(0, 'mismatch', l))!; return final ? [o.acc!, o.raw!, o.up!, o.raw2!, o.up2!] : [o.acc!]; });
    last = await engine.run(pm, cp, input, { base, coef, k: n + lead }, fetch, extra, opts.signal);
    for (const l of layers) acc.set(l, Float32Array.from(last[cp.plan.outputs.get(headKey(0, 'mismatch', l))!.acc!].data as Float32Array));
    opts.onProgress?.(done, total);
    if (final) break;
  }
  const out: MapResult[] = [];
  const described = estimate.mode === 'probe' ? { ...estimate, seed: estimate.seed ?? DEFAULT_PROBE_SEED, design: sweep.used as ProbeDesign } : estimate;
  for (const q of qs) for (const l of layers) {
    const o = cp.plan.outputs.get(headKey(0, 'mismatch', l))!;
    const gradient = (q.mismatch ?? 'weighted') === 'gradient';
    const note = gradient && onlyPoolingAndLinearToScores(pm, l)
      ? 'flat at this layer: its paths to the scores are only pooling and linear ops, so the gradient statistics do not vary over space'
      : undefined;
    out.push({
      question: q, layer: l,
      raw: slice(last[gradient ? o.raw2! : o.raw!], 0), up: slice(last[gradient ? o.up2! : o.up!], 0),
      estimate: { ...described, seeds: total } as MapResult['estimate'], note,
    });
  }
  return out;
}

const POOL_OR_LINEAR = new Set(['GlobalAveragePool', 'AveragePool', 'ReduceMean', 'ReduceSum', 'Flatten', 'Reshape', 'Squeeze', 'Unsqueeze', 'Gemm', 'MatMul', 'Add', 'Identity', 'Dropout', 'Transpose', 'BatchNormalization', 'Mul', 'Sub', 'Div']);

/** DESIGN §4: the `gradient` variant is spatially constant where every op to the scores is pooling or linear. */
export function onlyPoolingAndLinearToScores(pm: PreparedModel, layer: string): boolean {
  const a = pm.analysis;
  const seen = new Set([layer]);
  for (const n of a.graph.order) {
    if (!n.inputs.some((i) => seen.has(i))) continue;
    if (!POOL_OR_LINEAR.has(n.opType)) return false;
    // Mul/Div/Add/Sub are linear only with image-independent second operands.
    if (['Mul', 'Div', 'Add', 'Sub'].includes(n.opType) && n.inputs.filter((i) => a.differentiable(i)).length > 1) return false;
    for (const o of n.outputs) if (o && a.differentiable(o)) seen.add(o);
  }
  return true;
}

export interface PredictionMaps { scores: Float32Array; fact: number; foil: number; maps: MapResult[] }

/**
 * From a new image to the evidence or contrast maps of its own prediction in one native run:
 * the plan's seeds take the one-hots of the two largest scores inside the graph (fact = top-1,
 * foil = top-2; ties go to the lower index, as ONNX TopK orders them), so no separate forward
 * is needed for the prediction. Same maps as explainMaps with those classes.
 */
export async function explainPrediction(engine: Engine, pm: PreparedModel, input: Float32Array, kind: 'evidence' | 'contrast', layers: string[],
  opts: { contrast?: ContrastVariant; signal?: AbortSignal } = {}): Promise<PredictionMaps> {
  const R = pm.scores.numClasses;
  if (kind === 'contrast' && R < 2) throw new UserError('a contrast map needs at least two classes');
  const cp = await engine.compile(pm, { passes: [{ relu: 'standard', layers, heads: ['cam'] }], rankSeeds: true });
  const loss = kind === 'contrast' && (opts.contrast ?? 'margin') === 'loss';
  // margin: e_top1 − e_top2; loss: p − e_top2 (DESIGN §4); evidence: e_top1.
  const rank = Float32Array.from(kind === 'evidence' ? [1, 0] : loss ? [0, -1] : [1, -1]).subarray(0, Math.min(2, R));
  const fetch = [cp.plan.scoresOutput, ...layers.flatMap((l) => { const o = cp.plan.outputs.get(headKey(0, 'cam', l))!; return [o.raw!, o.up!]; })];
  const out = await engine.run(pm, cp, input, { base: new Float32Array(R), coef: Float32Array.of(loss ? 1 : 0), rank, k: 1 }, fetch, {}, opts.signal);
  const scores = Float32Array.from(out[cp.plan.scoresOutput].data as Float32Array);
  let fact = 0;
  for (let i = 1; i < R; i++) if (scores[i] > scores[fact]) fact = i;
  let foil = fact === 0 ? 1 : 0;
  for (let i = 0; i < R; i++) if (i !== fact && scores[i] > scores[foil]) foil = i;
  const question: Question = kind === 'evidence' ? { kind, fact } : { kind, fact, foil, contrast: opts.contrast ?? 'margin' };
  const maps = layers.map((layer) => {
    const o = cp.plan.outputs.get(headKey(0, 'cam', layer))!;
    return { question, layer, raw: slice(out[o.raw!], 0), up: slice(out[o.up!], 0) };
  });
  return { scores, fact, foil, maps };
}
