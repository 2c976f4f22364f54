/** Seed chunk sizes under a memory budget. */
import { PreparedModel } from '../plan/prepared';
import { ancestorsOf } from '../model/layers';
import { UserError } from '../errors';

export const DEFAULT_BUDGET_BYTES = 1024 ** 3;

/**
 * Seed rows per run are also capped for speed: runs whose gradients take at most this much are
 * faster per seed than budget-filling ones (measured with test/bench/conv-ab.ts on a 2-core Intel
 * Xeon with AVX-512, 3 Dec 2026: the exact sweep at stage 2 took 0.87× the time at 256, 128, 64
 * and 32 MiB per run against 509 rows in 1 GiB on ResNet-18, 0.71× on ResNet-50), so the budget
 * bounds memory and this bounds the run.
 */
export const RUN_BYTES = 256 * 1024 ** 2;

/**
 * Float32 values one seed keeps alive at the backward's peak: the backward runs in reverse
 * topological order, and the gradient of a tensor lives from the first rule that contributes to
 * it until its producer's rule has used it; each step also holds its new input gradients and one
 * temporary the size of its output gradient (masks, reshapes). The largest sum over the steps,
 * plus the gradients returned at the layers, is the per-seed peak.
 */
export function liveGradientValues(pm: PreparedModel, layers: string[]): number {
  const a = pm.analysis;
  const above = ancestorsOf(a, pm.scores.tensor);
  const below = new Set(layers);
  for (const n of a.graph.order) if (n.inputs.some((i) => below.has(i))) for (const o of n.outputs) if (o && a.differentiable(o)) below.add(o);
  const onPath = (t: string) => below.has(t) && above.has(t);
  const size = (t: string) => a.shape(t).reduce((x, y) => x * y, 1);
  const live = new Map<string, number>([[pm.scores.tensor, size(pm.scores.tensor)]]);
  let liveSum = size(pm.scores.tensor), peak = liveSum;
  for (const n of [...a.graph.order].reverse()) {
    const outs = n.outputs.filter((o) => o && live.has(o));
    const ins = n.inputs.filter((i) => i && onPath(i));
    if (!outs.length || !ins.length) continue; // no rule runs where no input needs a gradient
    const fresh = [...new Set(ins.filter((i) => !live.has(i)))];
    const freshSum = fresh.reduce((s, i) => s + size(i), 0);
    const temp = Math.max(...outs.map(size));
    peak = Math.max(peak, liveSum + freshSum + temp);
    for (const i of fresh) { live.set(i, size(i)); liveSum += size(i); }
    for (const o of outs) if (!layers.includes(o)) { liveSum -= live.get(o)!; live.delete(o); }
  }
  return peak + layers.reduce((s, l) => s + size(l), 0);
}

/**
 * Bytes per seed under the budget: the live-gradient peak, times 1.5 for the allocator's slack
 * (measured on the bench ResNet-18 at stage2: 1.6 MB per seed above the process floor for 514
 * seeds in one run, against 1.3 MB of live gradients; test/bench/chunk-memory.ts).
 */
export function bytesPerSeed(pm: PreparedModel, layers: string[]): number {
  return Math.max(1, Math.ceil(liveGradientValues(pm, layers) * 4 * 1.5));
}

/** How many seed rows fit one run under the budget (at least 3: the mismatch sweep's two statistic rows and one seed). */
export function seedChunkSize(pm: PreparedModel, layers: string[], budgetBytes = DEFAULT_BUDGET_BYTES): number {
  const perSeed = bytesPerSeed(pm, layers);
  if (3 * perSeed > budgetBytes) {
    throw new UserError(`explaining ${layerNames(layers)} of ${pm.model.path} needs about ${mb(3 * perSeed)} for its smallest batch of seeds, over the memory budget of ${mb(budgetBytes)}`,
      'pick a deeper layer, a smaller input size, or raise the memory budget');
  }
  return Math.max(3, Math.floor(Math.min(budgetBytes, RUN_BYTES) / perSeed));
}

/**
 * Refuses a run of `rows` seeds per pass that would not fit the budget (gradient questions run all
 * their seeds in one run, unlike mismatch sweeps, which are chunked by seedChunkSize).
 */
export function requireSeedsFit(pm: PreparedModel, layers: string[], rows: number, passes: number, budgetBytes = DEFAULT_BUDGET_BYTES): void {
  const need = bytesPerSeed(pm, layers) * rows * Math.max(1, passes);
  if (need <= budgetBytes) return;
  throw new UserError(`explaining ${layerNames(layers)} of ${pm.model.path} with ${rows} questions needs about ${mb(need)}, over the memory budget of ${mb(budgetBytes)}`,
    'ask fewer questions or layers at once, pick deeper layers, or raise the memory budget');
}

const mb = (b: number) => `${(b / 2 ** 20).toFixed(1)} MB`;
const layerNames = (layers: string[]) => layers.slice(0, 3).map((l) => `'${l}'`).join(', ') + (layers.length > 3 ? ', …' : '');
