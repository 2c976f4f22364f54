/**
 * Reverse-mode differentiation of the forward graph into ordinary ONNX nodes. Walks the nodes
 * between the requested tensors and the scores in reverse topological order, calls each op's
 * rule, and sums the contributions that meet at a tensor. Nodes off those paths are pruned.
 */
import { UserError } from '../errors';
import { ModelAnalysis } from '../model/analysis';
import { GraphNode, nodeLabel } from '../model/graph';
import { ancestorsOf } from '../model/layers';
import { GraphBuilder } from './builder';
import { gradientRules } from './rules';
import { RuleContext, zerosGrad } from './rule';

export interface BackwardRequest {
  scores: string;
  /** Tensors to differentiate with respect to (layer ids, or the image input). */
  wrt: string[];
  /** Name of the seed gradient at the scores, shape [K, ...scoresShape]. */
  seed: string;
  /** int64 [1] tensor holding K. */
  seedCount: string;
  relu: 'standard' | 'guided';
}

export interface BackwardGraph {
  /** Gradient tensor name ([K, ...shape]) for each requested tensor. */
  grads: Map<string, string>;
  /** Extra outputs the forward nodes must expose: node index → (output slot → name). */
  forwardOutputs: Map<number, Map<number, string>>;
}

/** Tensors reachable forward from `roots` through differentiable tensors. */
function descendants(a: ModelAnalysis, roots: string[]): Set<string> {
  const seen = new Set(roots);
  for (const n of a.graph.order) {
    if (n.inputs.some((i) => seen.has(i))) for (const o of n.outputs) if (o && a.differentiable(o)) seen.add(o);
  }
  return seen;
}

export function buildBackward(a: ModelAnalysis, req: BackwardRequest, b: GraphBuilder): BackwardGraph {
  const below = descendants(a, req.wrt);
  const above = ancestorsOf(a, req.scores);
  const onPath = (t: string) => below.has(t) && above.has(t);
  const parts = new Map<string, string[]>([[req.scores, [req.seed]]]);
  const forwardOutputs = new Map<number, Map<number, string>>();
  const total = (t: string): string | undefined => {
    const p = parts.get(t);
    if (!p || p.length === 0) return undefined;
    if (p.length === 1) return p[0];
    // A chain of binary Adds, not one Sum: onnxruntime fuses an Add into the Conv that makes one
    // of its inputs (its NCHWc Conv accumulates into the other), but not a Sum.
    const sum = p.slice(1).reduce((acc, x) => b.op1('Add', [acc, x]), p[0]);
    parts.set(t, [sum]);
    return sum;
  };
  for (const node of [...a.graph.order].reverse()) {
    if (!node.outputs.some((o) => o && onPath(o))) continue;
    const gradOut = node.outputs.map((o) => (o && onPath(o) ? total(o) : undefined));
    if (gradOut.every((g) => !g)) continue;
    const needs = node.inputs.map((i) => !!i && a.differentiable(i) && below.has(i) && above.has(i));
    if (!needs.some(Boolean)) continue;
    const rule = (node.domain === '' || node.domain === 'ai.onnx') ? gradientRules[node.opType] : undefined;
    if (!rule) {
      const domain = node.domain ? ` (domain ${node.domain})` : '';
      throw new UserError(`${nodeLabel(node)}${domain} has no gradient rule, and it lies between the requested layer and the scores`,
        'pick a layer after this node (factfoil layers shows which are explainable)');
    }
    const ctx: RuleContext = {
      node, b, gradOut, needs, relu: req.relu, seedCount: req.seedCount,
      shape: (t) => a.shape(t),
      value: (t) => a.value(t),
      forwardOutput: (slot) => exposeOutput(node, slot, forwardOutputs),
    };
    const grads = rule(ctx);
    node.inputs.forEach((i, k) => {
      if (!needs[k] || !grads[k]) return;
      const list = parts.get(i) ?? [];
      list.push(grads[k]!);
      parts.set(i, list);
    });
  }
  const grads = new Map<string, string>();
  for (const t of req.wrt) {
    const g = total(t);
    grads.set(t, g ?? zerosGrad({ b, seedCount: req.seedCount } as RuleContext, a.shape(t)));
  }
  return { grads, forwardOutputs };
}

function exposeOutput(node: GraphNode, slot: number, registry: Map<number, Map<number, string>>): string {
  const slots = registry.get(node.index) ?? new Map<number, string>();
  registry.set(node.index, slots);
  if (!slots.has(slot)) slots.set(slot, `${node.outputs[0]}::out${slot}`);
  return slots.get(slot)!;
}
