/** Emits ONNX nodes and constants with unique names; the only way rules create graph content. */
import { AttributeProto, AttrType, NodeProto, TensorProto } from '../model/proto';
import { floatTensor, int64Tensor } from '../model/tensor';

export type Attr =
  | { i: number } | { f: number } | { ints: number[] } | { floats: number[] } | { s: string } | { t: TensorProto };

export const A = {
  i: (v: number): Attr => ({ i: v }),
  f: (v: number): Attr => ({ f: v }),
  ints: (v: number[]): Attr => ({ ints: v }),
  floats: (v: number[]): Attr => ({ floats: v }),
  s: (v: string): Attr => ({ s: v }),
};

const utf8 = new TextEncoder();

function encodeAttr(name: string, a: Attr): AttributeProto {
  if ('i' in a) return { name, type: AttrType.INT, i: a.i };
  if ('f' in a) return { name, type: AttrType.FLOAT, f: a.f };
  if ('ints' in a) return { name, type: AttrType.INTS, ints: a.ints };
  if ('floats' in a) return { name, type: AttrType.FLOATS, floats: a.floats };
  if ('s' in a) return { name, type: AttrType.STRING, s: utf8.encode(a.s) };
  return { name, type: AttrType.TENSOR, t: a.t };
}

export class GraphBuilder {
  readonly nodes: NodeProto[] = [];
  readonly initializers: TensorProto[] = [];
  private counter = 0;
  private readonly constCache = new Map<string, string>();

  constructor(private readonly prefix: string) {}

  fresh(hint: string): string {
    return `${this.prefix}${hint}_${this.counter++}`;
  }

  /** Appends one node and returns its output names. */
  op(opType: string, inputs: string[], attrs: Record<string, Attr> = {}, outputs = 1, hint = opType): string[] {
    const outs = Array.from({ length: outputs }, () => this.fresh(hint));
    this.nodes.push({
      op_type: opType,
      name: this.fresh(`n_${opType}`),
      input: inputs,
      output: outs,
      attribute: Object.entries(attrs).map(([k, v]) => encodeAttr(k, v)),
    });
    return outs;
  }

  op1(opType: string, inputs: string[], attrs: Record<string, Attr> = {}): string {
    return this.op(opType, inputs, attrs)[0];
  }

  /** Appends a node writing to given output names (used for named plan outputs). */
  opTo(opType: string, inputs: string[], outputs: string[], attrs: Record<string, Attr> = {}): void {
    this.nodes.push({ op_type: opType, name: this.fresh(`n_${opType}`), input: inputs, output: outputs, attribute: Object.entries(attrs).map(([k, v]) => encodeAttr(k, v)) });
  }

  constF(values: ArrayLike<number>, dims: number[]): string {
    return this.constant('f', values, dims, () => floatTensor('', dims, values));
  }

  constI64(values: ArrayLike<number>, dims: number[] = [values.length]): string {
    return this.constant('i', values, dims, () => int64Tensor('', dims, values));
  }

  scalarF(v: number): string {
    return this.constF([v], []);
  }

  private constant(kind: string, values: ArrayLike<number>, dims: number[], make: () => TensorProto): string {
    // Small constants are shared; large ones (index maps, weights) are unique anyway.
    const key = values.length <= 64 ? `${kind}|${dims.join(',')}|${Array.from(values).join(',')}` : '';
    if (key && this.constCache.has(key)) return this.constCache.get(key)!;
    const name = this.fresh(`c${kind}`);
    this.initializers.push({ ...make(), name });
    if (key) this.constCache.set(key, name);
    return name;
  }
}
