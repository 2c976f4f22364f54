/** Seed chunk sizes under a memory budget. */
import { PreparedModel } from '../plan/prepared';
import { ancestorsOf } from '../model/layers';

export const DEFAULT_BUDGET_BYTES = 1024 ** 3;

/**
 * How many seeds fit one run: each seed carries a gradient for every tensor between the layers
 * and the scores; live buffers are estimated as twice their sum (the backward keeps about one
 * gradient and one temporary per tensor alive; a rule of thumb measured on the ResNet fixtures,
 * no source).
 */
export function seedChunkSize(pm: PreparedModel, layers: string[], budgetBytes = DEFAULT_BUDGET_BYTES): number {
  const a = pm.analysis;
  const above = ancestorsOf(a, pm.scores.tensor);
  const seen = new Set(layers);
  let elements = 0;
  for (const n of a.graph.order) {
    if (!n.inputs.some((i) => seen.has(i))) continue;
    for (const o of n.outputs) if (o && above.has(o) && a.differentiable(o)) { seen.add(o); elements += a.shape(o).reduce((x, y) => x * y, 1); }
  }
  for (const l of layers) elements += a.shape(l).reduce((x, y) => x * y, 1);
  const perSeed = Math.max(1, elements * 4 * 2);
  return Math.max(3, Math.min(pm.scores.numClasses + 2, Math.floor(budgetBytes / perSeed)));
}
