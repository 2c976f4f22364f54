/** An indexed view of an ONNX graph: nodes with decoded attributes, producers, consumers, order. */
import { AttributeProto, AttrType, GraphProto, NodeProto, TensorProto, ValueInfoProto } from './proto';
import { UserError } from '../errors';

export type AttrValue = number | number[] | string | string[] | TensorProto | GraphProto;

export interface GraphNode {
  /** Position in the model's node list; also the stable fallback name. */
  index: number;
  name: string;
  opType: string;
  domain: string;
  inputs: string[];
  outputs: string[];
  attrs: Map<string, AttrValue>;
  proto: NodeProto;
}

export interface GraphIndex {
  nodes: GraphNode[];
  /** Nodes in a topological order (the model's order when it is already one). */
  order: GraphNode[];
  producer: Map<string, GraphNode>;
  consumers: Map<string, GraphNode[]>;
  initializers: Map<string, TensorProto>;
  /** Graph inputs that are not initializers. */
  inputs: ValueInfoProto[];
  outputs: ValueInfoProto[];
}

const utf8 = new TextDecoder();

export function decodeAttribute(a: AttributeProto): AttrValue {
  switch (a.type) {
    case AttrType.FLOAT: return a.f ?? 0;
    case AttrType.INT: return a.i ?? 0;
    case AttrType.STRING: return utf8.decode(a.s ?? new Uint8Array());
    case AttrType.TENSOR: return a.t ?? {};
    case AttrType.GRAPH: return a.g ?? {};
    case AttrType.FLOATS: return a.floats ?? [];
    case AttrType.INTS: return a.ints ?? [];
    case AttrType.STRINGS: return (a.strings ?? []).map((s) => utf8.decode(s));
    default:
      // Older exporters leave `type` unset; infer from the populated field.
      if (a.ints?.length) return a.ints;
      if (a.floats?.length) return a.floats;
      if (a.t) return a.t;
      if (a.s) return utf8.decode(a.s);
      if (a.f !== undefined) return a.f;
      return a.i ?? 0;
  }
}

export function nodeLabel(n: GraphNode): string {
  return `${n.opType} node '${n.name}'`;
}

export function indexGraph(graph: GraphProto, modelPath: string): GraphIndex {
  const initializers = new Map<string, TensorProto>();
  for (const t of graph.initializer ?? []) initializers.set(t.name ?? '', t);
  const nodes: GraphNode[] = (graph.node ?? []).map((p, index) => ({
    index,
    name: p.name || `#${index}`,
    opType: p.op_type ?? '',
    domain: p.domain ?? '',
    inputs: p.input ?? [],
    outputs: p.output ?? [],
    attrs: new Map((p.attribute ?? []).map((a) => [a.name ?? '', decodeAttribute(a)])),
    proto: p,
  }));
  const producer = new Map<string, GraphNode>();
  const consumers = new Map<string, GraphNode[]>();
  const inputNames = new Set((graph.input ?? []).map((v) => v.name ?? ''));
  for (const n of nodes) {
    if (!n.opType) throw new UserError(`${modelPath}: node '${n.name}' has no op type`, 'the model is not valid ONNX; re-export it');
    for (const o of n.outputs) {
      if (!o) continue;
      if (producer.has(o) || initializers.has(o) || inputNames.has(o)) {
        throw new UserError(`${modelPath}: tensor '${o}' is produced twice (by ${nodeLabel(n)})`, 'the model is not valid ONNX; re-export it');
      }
      producer.set(o, n);
    }
    for (const i of n.inputs) {
      if (!i) continue;
      const list = consumers.get(i) ?? [];
      list.push(n);
      consumers.set(i, list);
    }
  }
  const inputs = (graph.input ?? []).filter((v) => !initializers.has(v.name ?? ''));
  const known = new Set<string>([...initializers.keys(), ...inputs.map((v) => v.name ?? '')]);
  const order = topologicalOrder(nodes, producer, known, modelPath);
  for (const v of graph.output ?? []) {
    const name = v.name ?? '';
    if (!producer.has(name) && !known.has(name)) {
      throw new UserError(`${modelPath}: graph output '${name}' is produced by no node`, 'the model is not valid ONNX; re-export it');
    }
  }
  return { nodes, order, producer, consumers, initializers, inputs, outputs: graph.output ?? [] };
}

/** Kahn's algorithm; names a dangling input or a cycle precisely. */
function topologicalOrder(nodes: GraphNode[], producer: Map<string, GraphNode>, known: Set<string>, modelPath: string): GraphNode[] {
  const pending = new Map<GraphNode, number>();
  const waiting = new Map<string, GraphNode[]>();
  const ready: GraphNode[] = [];
  for (const n of nodes) {
    let count = 0;
    for (const i of new Set(n.inputs)) {
      if (!i || known.has(i)) continue;
      if (!producer.has(i)) {
        throw new UserError(`${modelPath}: ${nodeLabel(n)} reads tensor '${i}', which nothing produces`, 'the model is not valid ONNX; re-export it');
      }
      count++;
      const w = waiting.get(i) ?? [];
      w.push(n);
      waiting.set(i, w);
    }
    pending.set(n, count);
    if (count === 0) ready.push(n);
  }
  const order: GraphNode[] = [];
  while (ready.length) {
    const n = ready.shift()!;
    order.push(n);
    for (const o of n.outputs) {
      for (const c of waiting.get(o) ?? []) {
        const left = pending.get(c)! - 1;
        pending.set(c, left);
        if (left === 0) ready.push(c);
      }
    }
  }
  if (order.length !== nodes.length) {
    const stuck = nodes.find((n) => pending.get(n)! > 0)!;
    throw new UserError(`${modelPath}: the graph has a cycle through ${nodeLabel(stuck)}`, 'the model is not valid ONNX; re-export it');
  }
  return order;
}

export function attrInt(n: GraphNode, name: string, fallback: number): number {
  const v = n.attrs.get(name);
  return typeof v === 'number' ? v : fallback;
}
export function attrFloat(n: GraphNode, name: string, fallback: number): number {
  const v = n.attrs.get(name);
  return typeof v === 'number' ? v : fallback;
}
export function attrInts(n: GraphNode, name: string): number[] | undefined {
  const v = n.attrs.get(name);
  return Array.isArray(v) ? (v as number[]) : undefined;
}
export function attrString(n: GraphNode, name: string, fallback: string): string {
  const v = n.attrs.get(name);
  return typeof v === 'string' ? v : fallback;
}
