/** Raw gradients at layers: the `factfoil grad` command and the reference checks. */
import { Engine, SeedBatch } from '../engine/engine';
import { PreparedModel } from '../plan/prepared';
import { headKey } from '../plan/compose';

export type LossKind = 'logit' | 'ce';

/** Seed for s = z_target (logit) or s = CE(z, target) (∂CE/∂z = p − e_target). */
export function lossSeed(R: number, target: number, loss: LossKind): SeedBatch {
  const base = new Float32Array(R);
  base[target] = loss === 'logit' ? 1 : -1;
  return { base, coef: Float32Array.of(loss === 'ce' ? 1 : 0), k: 1 };
}

/** ∂s/∂layer for each seed row; returns [K, ...layerShape] per layer (batch axis of batch-1 tensors kept as in the forward). */
export async function gradientsAt(engine: Engine, pm: PreparedModel, input: Float32Array, layers: string[], seeds: SeedBatch,
  relu: 'standard' | 'guided' = 'standard'): Promise<Map<string, { data: Float32Array; dims: number[] }>> {
  const req = { passes: [{ relu, layers, heads: ['grad' as const] }] };
  const cp = await engine.compile(pm, req);
  const names = layers.map((l) => cp.plan.outputs.get(headKey(0, 'grad', l))!.raw!);
  const out = await engine.run(pm, cp, input, seeds, names);
  return new Map(layers.map((l, i) => [l, { data: out[names[i]].data as Float32Array, dims: out[names[i]].dims.map(Number) }]));
}
