/**
 * Splits a composed plan into a forward graph (everything that depends on the image but not on
 * the seeds) and a backward graph (everything that depends on the seeds), so a sweep of many
 * seed chunks runs the forward once per image and feeds its activations to every chunk.
 * Constant subgraphs (weights, flipped kernels, shape arithmetic on constants) go to whichever
 * side uses them, so the runtime still folds them there.
 */
import { GraphProto, ModelProto, NodeProto, TensorProto } from '../model/proto';

export interface SplitPlan {
  forward: ModelProto;
  /** The backward graph; its inputs for `boundary` get their types from the first forward run. */
  backward: ModelProto;
  /** Forward tensors the backward reads (activations, masks, pooling indices, the image itself). */
  boundary: string[];
  /** Plan outputs the forward produces (scores, activation-only heads). */
  forwardOutputs: string[];
}

/** undefined when the graph holds subgraphs (If/Loop bodies read outer names this split cannot see). */
export function splitPlan(model: ModelProto, image: string, seedInputs: string[]): SplitPlan | undefined {
  const g = model.graph!;
  const nodes = g.node ?? [];
  if (nodes.some((n) => (n.attribute ?? []).some((a) => a.g || ((a.graphs as unknown[] | undefined) ?? []).length))) return undefined;
  const seedDep = new Set(seedInputs), imageDep = new Set([image]);
  const side: ('f' | 'b' | 'c')[] = nodes.map((n) => {
    const ins = (n.input ?? []).filter(Boolean);
    const s = ins.some((i) => seedDep.has(i)) ? 'b' : ins.some((i) => imageDep.has(i)) ? 'f' : 'c';
    for (const o of n.output ?? []) if (o) (s === 'b' ? seedDep : s === 'f' ? imageDep : new Set<string>()).add(o);
    return s;
  });
  const producer = new Map<string, number>();
  nodes.forEach((n, i) => { for (const o of n.output ?? []) if (o) producer.set(o, i); });
  const outputs = (g.output ?? []).map((o) => o.name!);

  // Backward: its own nodes plus the constant nodes they need; forward tensors it reads cross over.
  const inBackward = new Set<number>(), boundary = new Set<string>();
  const needBackward = (t: string) => {
    const p = producer.get(t);
    if (p === undefined) { if (imageDep.has(t)) boundary.add(t); return; }
    if (side[p] === 'f') { boundary.add(t); return; }
    if (inBackward.has(p)) return;
    inBackward.add(p);
    for (const i of nodes[p].input ?? []) if (i) needBackward(i);
  };
  nodes.forEach((n, i) => { if (side[i] === 'b') for (const o of n.output ?? []) if (o) needBackward(o); });
  const backwardOutputs = outputs.filter((o) => seedDep.has(o));
  const forwardOutputs = outputs.filter((o) => !seedDep.has(o));

  // Forward: what produces the boundary and the forward-side outputs.
  const inForward = new Set<number>();
  const needForward = (t: string) => {
    const p = producer.get(t);
    if (p === undefined || inForward.has(p)) return;
    inForward.add(p);
    for (const i of nodes[p].input ?? []) if (i) needForward(i);
  };
  for (const t of [...boundary, ...forwardOutputs]) needForward(t);

  const pick = (keep: Set<number>): NodeProto[] => nodes.filter((_, i) => keep.has(i));
  const initializers = (ns: NodeProto[]): TensorProto[] => {
    const used = new Set(ns.flatMap((n) => n.input ?? []));
    return (g.initializer ?? []).filter((t) => used.has(t.name!));
  };
  const graph = (ns: NodeProto[], inputs: GraphProto['input'], outs: string[]): GraphProto => ({
    ...g, node: ns, initializer: initializers(ns), input: inputs, output: outs.map((name) => ({ name })), value_info: [],
  });
  const fNodes = pick(inForward), bNodes = pick(inBackward);
  const imageInput = (g.input ?? []).filter((i) => i.name === image);
  const bUses = new Set(bNodes.flatMap((n) => n.input ?? []));
  const seedSide = (g.input ?? []).filter((i) => i.name !== image && bUses.has(i.name!));
  const crossing = [...boundary].filter((t) => t !== image);
  return {
    forward: { ...model, graph: graph(fNodes, imageInput, [...crossing, ...forwardOutputs.filter((o) => !boundary.has(o))]) },
    backward: { ...model, graph: graph(bNodes, [...seedSide, ...(boundary.has(image) ? imageInput : [])], backwardOutputs) },
    boundary: crossing,
    forwardOutputs,
  };
}
