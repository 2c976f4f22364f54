/**
 * The engine: prepared models and compiled sessions, cached per (model sha256, input shape,
 * plan), and runs of composed plans with seed batches. Everything ONNX goes through here.
 */
import { LoadedModel, loadModel } from '../model/load';
import { PreparedModel, prepareModel } from '../plan/prepared';
import { ComposedPlan, composePlan, PlanRequest } from '../plan/compose';
import { concreteInputDims, probeModel } from './probe';
import { createSession, floatTensor, ort, runSession, RuntimeOptions, defaultRuntimeOptions } from './runtime';
import { UserError } from '../errors';
import { encodeModelProto, ModelProto, TensorType } from '../model/proto';

export interface SeedBatch {
  /** [K,R] row-major. */
  base: Float32Array;
  /** [K] softmax coefficients. */
  coef: Float32Array;
  /** [K,2] weights of the top-1 and top-2 one-hots (plans composed with rankSeeds; zeros when absent). */
  rank?: Float32Array;
  k: number;
}

export interface CompiledPlan {
  plan: ComposedPlan;
  /** The whole plan; for a split plan, its forward graph. */
  session: ort.InferenceSession;
  /** A split plan's backward session (made on the first run, typed by the forward's outputs) and the last forward. */
  split?: { backward?: Promise<ort.InferenceSession>; inFlight: Set<Promise<unknown>>; last?: { input: Float32Array; out: Record<string, ort.Tensor> } };
}

export class Engine {
  private readonly prepared = new Map<string, Promise<PreparedModel>>();
  private readonly compiled = new Map<string, Promise<CompiledPlan>>();
  /** The split plan whose backward session holds its memory arena (at most one; runtime.ts). */
  private sweepHolder?: CompiledPlan;

  constructor(readonly options: RuntimeOptions = defaultRuntimeOptions, private readonly maxSessions = 8) {}

  /** Loads, probes and analyses a model once per (sha256, input shape). */
  async prepare(model: string | LoadedModel, inputDims?: number[], opts: { anyScores?: boolean } = {}): Promise<PreparedModel> {
    const m = typeof model === 'string' ? loadModel(model) : model;
    const dims = inputDims ?? concreteInputDims(m.input.dims);
    const key = `${m.sha256}|${dims.join('x')}|${opts.anyScores ? 'any' : 'cls'}`;
    let p = this.prepared.get(key);
    if (!p) {
      p = probeModel(m, dims, undefined, this.options).then((facts) => prepareModel(m, facts, dims, opts.anyScores));
      this.prepared.set(key, p);
      p.catch(() => this.prepared.delete(key));
    }
    return p;
  }

  async compile(pm: PreparedModel, req: PlanRequest): Promise<CompiledPlan> {
    const key = `${pm.model.sha256}|${pm.inputDims.join('x')}|${JSON.stringify(req)}`;
    let c = this.compiled.get(key);
    if (!c) {
      c = (async () => {
        const plan = composePlan(pm, req);
        const bytes = plan.split ? encodeModelProto(plan.split.forward) : plan.bytes;
        const session = await createSession(bytes, `the explanation plan for ${pm.model.path}`, this.options);
        return { plan, session, split: plan.split ? { inFlight: new Set<Promise<unknown>>() } : undefined };
      })();
      this.compiled.set(key, c);
      c.catch(() => this.compiled.delete(key));
      this.evict();
    }
    return c;
  }

  /**
   * One native run of a compiled plan. `extra` feeds accumulators and scales by name. An abort
   * rejects at once with 'cancelled'; the native run cannot be interrupted, so it finishes in the
   * background and its result is dropped.
   */
  async run(pm: PreparedModel, cp: CompiledPlan, input: Float32Array, seeds: SeedBatch, fetch: string[], extra: Record<string, ort.Tensor> = {}, signal?: AbortSignal): Promise<Record<string, ort.Tensor>> {
    const R = pm.scores.numClasses;
    const feeds = {
      [pm.model.input.name]: floatTensor(input, pm.inputDims),
      [cp.plan.seedBase]: floatTensor(seeds.base, [seeds.k, R]),
      [cp.plan.seedCoef]: floatTensor(seeds.coef, [seeds.k, 1]),
      ...(cp.plan.seedRank ? { [cp.plan.seedRank]: floatTensor(seeds.rank ?? new Float32Array(seeds.k * Math.min(2, R)), [seeds.k, Math.min(2, R)]) } : {}),
      ...extra,
    };
    if (cp.split && cp.plan.split) return abortable(this.runSplit(pm, cp, input, feeds, fetch), signal);
    return abortable(runSession(cp.session, feeds, fetch, `the explanation plan for ${pm.model.path}`), signal);
  }

  /**
   * A split plan: the forward runs once per image (the last one is kept, compared by value), its
   * activations feed the backward session, which runs once per seed chunk.
   */
  private async runSplit(pm: PreparedModel, cp: CompiledPlan, input: Float32Array, feeds: Record<string, ort.Tensor>, fetch: string[]): Promise<Record<string, ort.Tensor>> {
    const plan = cp.plan.split!, state = cp.split!;
    const what = `the explanation plan for ${pm.model.path}`;
    let fwd = state.last && sameValues(state.last.input, input) ? state.last.out : undefined;
    if (!fwd) {
      const names = [...cp.session.outputNames];
      fwd = await runSession(cp.session, { [pm.model.input.name]: feeds[pm.model.input.name] }, names, what);
      state.last = { input: Float32Array.from(input), out: fwd };
    }
    const out: Record<string, ort.Tensor> = {};
    for (const f of fetch) if (fwd[f]) out[f] = fwd[f];
    const rest = fetch.filter((f) => !out[f]);
    if (!rest.length) return out;
    const forward = fwd;
    if (!state.backward) {
      this.releaseSweepHolder();
      this.sweepHolder = cp;
      state.backward = createSession(encodeModelProto(typedBoundary(plan.backward, plan.boundary, forward)), what, this.options, true);
      state.backward.catch(() => { state.backward = undefined; });
    }
    const backward = state.backward;
    // Registered before the first await, so that a release waits for this run.
    const run = (async () => {
      const session = await backward;
      const all: Record<string, ort.Tensor> = { ...feeds };
      for (const t of plan.boundary) all[t] = forward[t];
      const given = Object.fromEntries(session.inputNames.map((n) => [n, all[n]]));
      return runSession(session, given, rest, what);
    })();
    const settled = run.catch(() => undefined).finally(() => state.inFlight.delete(settled));
    state.inFlight.add(settled);
    return Object.assign(out, await run);
  }

  /**
   * A sweep session keeps about its peak memory between runs, so only the latest sweep's does:
   * the previous one is released once its last run has finished (a cancelled run still runs
   * natively), and made again if its plan sweeps again (about a second on ResNet-18).
   */
  private releaseSweepHolder(): void {
    const held = this.sweepHolder?.split;
    this.sweepHolder = undefined;
    if (held) releaseBackward(held).catch(() => undefined);
  }

  /** How many compiled split plans hold a backward session now (at most one). */
  async sweepSessions(): Promise<number> {
    let n = 0;
    for (const c of this.compiled.values()) if ((await c.catch(() => undefined))?.split?.backward) n++;
    return n;
  }

  /** Plain forward pass: the scores (logits) of one input. */
  async scores(pm: PreparedModel, input: Float32Array): Promise<Float32Array> {
    const cp = await this.compile(pm, { passes: [] });
    const R = pm.scores.numClasses;
    const out = await runSession(cp.session, { [pm.model.input.name]: floatTensor(input, pm.inputDims), ff_seed_base: floatTensor(new Float32Array(R), [1, R]), ff_seed_coef: floatTensor(new Float32Array(1), [1, 1]) }, [cp.plan.scoresOutput], pm.model.path);
    return out[cp.plan.scoresOutput].data as Float32Array;
  }

  /** Forward activations of the given tensors (batch-1 shapes as in the model). */
  async activations(pm: PreparedModel, input: Float32Array, tensors: string[]): Promise<Map<string, Float32Array>> {
    const cp = await this.compile(pm, { passes: [], expose: tensors });
    const R = pm.scores.numClasses;
    const out = await runSession(cp.session, { [pm.model.input.name]: floatTensor(input, pm.inputDims), ff_seed_base: floatTensor(new Float32Array(R), [1, R]), ff_seed_coef: floatTensor(new Float32Array(1), [1, 1]) }, tensors, pm.model.path);
    return new Map(tensors.map((t) => [t, out[t].data as Float32Array]));
  }

  private evict(): void {
    while (this.compiled.size > this.maxSessions) {
      const [key, c] = this.compiled.entries().next().value as [string, Promise<CompiledPlan>];
      this.compiled.delete(key);
      c.then(releaseCompiled).catch(() => undefined);
    }
  }

  async dispose(): Promise<void> {
    for (const c of this.compiled.values()) await c.then(releaseCompiled).catch(() => undefined);
    this.compiled.clear();
    this.prepared.clear();
  }
}

async function releaseCompiled(c: CompiledPlan): Promise<void> {
  await c.session.release();
  if (c.split) await releaseBackward(c.split);
}

/**
 * Drops a split plan's backward session at once (its next run makes a new one) and releases it
 * when the runs in flight on it have finished.
 */
async function releaseBackward(split: NonNullable<CompiledPlan['split']>): Promise<void> {
  const backward = split.backward;
  if (!backward) return;
  split.backward = undefined;
  await Promise.all([...split.inFlight]);
  await (await backward).release();
}

function sameValues(a: Float32Array, b: Float32Array): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (a[i] !== b[i] && !(a[i] !== a[i] && b[i] !== b[i])) return false;
  return true;
}

const ELEM_TYPES: Record<string, number> = { float32: TensorType.FLOAT, int64: TensorType.INT64, int32: TensorType.INT32, bool: TensorType.BOOL, uint8: TensorType.UINT8, int8: TensorType.INT8 };

/** The backward graph with its boundary inputs typed and shaped as the forward produced them. */
function typedBoundary(model: ModelProto, boundary: string[], forward: Record<string, ort.Tensor>): ModelProto {
  const g = model.graph!;
  const inputs = boundary.map((name) => ({
    name, type: { tensor_type: { elem_type: ELEM_TYPES[forward[name].type] ?? TensorType.FLOAT, shape: { dim: forward[name].dims.map((d) => ({ dim_value: Number(d) })) } } },
  }));
  return { ...model, graph: { ...g, input: [...(g.input ?? []), ...inputs] } };
}

function abortable<T>(work: Promise<T>, signal?: AbortSignal): Promise<T> {
  if (!signal) return work;
  work.catch(() => undefined); // a dropped run's failure must not surface as an unhandled rejection
  return new Promise<T>((resolve, reject) => {
    const onAbort = () => reject(new UserError('cancelled'));
    if (signal.aborted) return onAbort();
    signal.addEventListener('abort', onAbort, { once: true });
    work.then(resolve, reject).finally(() => signal.removeEventListener('abort', onAbort));
  });
}

export function oneHotSeeds(R: number, rows: { index?: number; sign?: number; minus?: number; coef?: number }[]): SeedBatch {
  const k = rows.length;
  const base = new Float32Array(k * R);
  const coef = new Float32Array(k);
  rows.forEach((r, i) => {
    if (r.index !== undefined) base[i * R + r.index] += r.sign ?? 1;
    if (r.minus !== undefined) base[i * R + r.minus] -= 1;
    coef[i] = r.coef ?? 0;
  });
  return { base, coef, k };
}
